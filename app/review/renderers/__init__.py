"""Report renderers: one module per format, all drawing their content from :mod:`.common`."""
