"""Finishing: the solver's result made into the delivered frame (palette, strength, matte, light)."""
