"""Looking at what was baked: lit material previews (:mod:`bakery.preview.render`) and contact sheets
(:mod:`bakery.preview.sheet`)."""
