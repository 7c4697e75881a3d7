"""Guidance: rules as data (``rules/*.toml``), their schema, loading and layering, and evaluation."""
