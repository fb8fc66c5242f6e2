"""Stage 5, pipeline: the whole campaign: runs reduced in parallel, cached, failures isolated,
and the results folder, figures and report written as one."""
