"""gradwright."""
