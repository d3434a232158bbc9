"""Presentation for chaintriage: the command line and the Textual app."""
