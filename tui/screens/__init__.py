"""The app's screens, one module each: the triage screen (``triage``), help, findings,
shortlist, and the dialogs (column picker, filter, path prompt, yes/no question)."""
