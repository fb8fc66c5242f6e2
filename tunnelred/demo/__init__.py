"""Stage 5, demo: synthetic campaigns with known truth from a forward model.

truth (the illustrative free-air model) -> spec (what a campaign is, its schedule) -> forward (what
the instruments record) -> writer (``make_campaign``, ``write_demo_campaign``: the files).
"""
