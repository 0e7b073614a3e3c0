"""The HTTP layer: FastAPI app factory, schemas, routes and RFC 9457 problem responses."""
