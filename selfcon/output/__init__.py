"""Stage 4, output: what a converged potential means, and its file.

Owns the layout of every file selfcon writes (:mod:`selfcon.output.schema`, data only) and
their netCDF-compatible HDF5 writing (:mod:`~selfcon.output.netcdf`), the ``Result``
object with its HDF5 writer and reader (:mod:`~selfcon.output.result`), the xarray readers
of sweep files and study tables (:mod:`~selfcon.output.readers`), the assembly of a
``Result`` from the loop's outcome (:mod:`~selfcon.output.assemble`), the design warnings
(:mod:`~selfcon.output.diagnostics`), and the views of a result: text and JSON summaries
(:mod:`~selfcon.output.report`), figures (:mod:`~selfcon.output.plot`) and CSV tables
(:mod:`~selfcon.output.export`).

May import: the foundation modules, ``selfcon.input``, ``selfcon.model`` and
``selfcon.solver``.  Never ``selfcon.api``, design, batch or the command line.
"""
