"""Model families, one module each, behind the shape of ``models.base``."""
