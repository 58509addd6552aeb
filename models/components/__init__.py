"""Machine components: one module per component or machine part."""
