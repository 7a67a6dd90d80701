"""File formats: one module per format, each turning files into core objects."""
