"""Quality checks of footage and renders."""
