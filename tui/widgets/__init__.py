"""The triage screen's own widgets: the strike ladder, the distribution plot and the information bars."""
