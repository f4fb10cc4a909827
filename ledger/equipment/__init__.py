"""Processing systems (skids): their registration, instruments and approved mappings."""
