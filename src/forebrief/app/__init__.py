"""The weekly pipeline, configuration files and delivery."""
