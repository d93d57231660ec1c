"""Multi-step jobs (the demo, reports) built from the layers below."""
