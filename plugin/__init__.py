"""heatsoak.plugin: the heat-diffusion panel for pyvista + trame mesh viewers.

``mount(server, plotter, data_dir=...)`` adds the panel to any trame app
(vue3 client) that shows a pyvista plotter; see ``plugin/README.md``.
``heatsoak ui`` runs the bare viewer of :mod:`heatsoak.plugin.app`.
The UI stack is imported only when the panel is mounted.
"""


def mount(server, plotter, **kwargs):
    """Mount the heat-diffusion panel; see :func:`heatsoak.plugin.panel.mount`."""
    from heatsoak.plugin.panel import mount as _mount

    return _mount(server, plotter, **kwargs)


__all__ = ["mount"]
