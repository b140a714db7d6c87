"""Reports on stored work: what a lot, a station or a test plan produced, in numbers, pictures
and files. :mod:`~acquire.report.statistics` works out a selection's yields, bins, failing checks
and each quantity's mean, spread and capability (Cp, Cpk, Pp, Ppk) from the store's SQL;
:mod:`~acquire.report.control` draws up individuals and moving-range control charts and their run
rules; :mod:`~acquire.report.lot_export` writes a selection's units as long or wide CSV files.
Picture and page modules sit beside them and import matplotlib only inside themselves.
"""
