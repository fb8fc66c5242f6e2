"""Stage 4, products: the results folder, figures, the PDF report and comparisons."""
