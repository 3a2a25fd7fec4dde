"""Catalog stage: read and validate the catalog CSV, parse colours and finishes, expand templates."""
