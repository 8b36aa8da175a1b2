"""Screens of the bench notebook: start, session, summary, and the modal prompts."""
