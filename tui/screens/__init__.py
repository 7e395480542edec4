"""One module per tab of the workbench."""
