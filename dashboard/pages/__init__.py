"""Dashboard pages (each registers itself with Dash Pages)."""
