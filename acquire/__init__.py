"""What an engineer does with an impedance meter: sweeps, fixture compensation, coil models,
production testing, the results store, reports, the live dashboard and the command line."""

__version__ = "0.1.0"
