"""The desktop app (PySide6 only): main window, Canvas, Worklist, Owners, Ledger, Notes, and the
one overlay painter shared by the Canvas and the headless ``render`` command.

- :mod:`app.ui.overlay` -- the overlay painter: palette, joint glyphs, limbs, tags, halos.
- :mod:`app.ui.render` -- a frame at full resolution with the overlay, without a window.
- :mod:`app.ui.canvas` -- the interactive image view (pan, zoom, select, drag).
- :mod:`app.ui.models` -- item models over store queries (Worklist, Owners, Ledger, Notes).
- :mod:`app.ui.window` -- the main window that ties them together.
- :mod:`app.ui.keys` -- every key of the app, in one table (menus, F1 sheet, README).
- :mod:`app.ui.commands` -- ``posewright open`` and ``posewright render``.

Every change goes through :meth:`app.store.Project.apply` (or undo, redo, return-to); nothing
here writes to the database directly.
"""
