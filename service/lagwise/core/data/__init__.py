"""Sample data: validated sample sets, censored values, geographic coordinates, transforms, summaries."""
