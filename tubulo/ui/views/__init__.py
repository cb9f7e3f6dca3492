"""The views of the workbench, one module each (Workup, Differential, Evidence, Links, Nephron, Plan)."""

__all__: list[str] = []
