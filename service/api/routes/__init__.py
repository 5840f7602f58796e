"""One module of routes per resource."""
