"""Post-processing of stress results (pure functions).

Import the submodules directly, e.g. ``from elastofe.post.linearize import linearize``.
"""

__all__: list[str] = []
