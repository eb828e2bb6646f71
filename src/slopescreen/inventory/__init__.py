"""Agreement of the hazard maps with mapped landslides (docs/methods.md, "Agreement with mapped landslides")."""

__all__ = []
