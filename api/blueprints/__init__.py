"""One blueprint module per resource; each defines ``bp`` and is registered under /api/v1."""
