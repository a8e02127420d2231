"""drillaxis viewer: figures, the report page and the 3D scene. Depends on engine, never the reverse.

Nothing is here yet: the report page and the scene arrive with their steps (see DEVELOPERS.md).
"""
