"""Request and response schemas, one module per endpoint group."""
