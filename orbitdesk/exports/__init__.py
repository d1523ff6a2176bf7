"""Files made from a project: LaTeX, standalone scripts, CSV tables, the HTML report."""
