"""The job spec: the pydantic model (the one schema), run profiles, cross-field checks and the
generated reference (``python -m sweep.spec --markdown``)."""
