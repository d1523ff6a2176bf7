"""Headless core: model language, compiled systems, engine, analyses, project document. No Qt here."""
