"""The side panels beside the view (drive, tables, gap plot, stack-up) and the dialogs."""
