"""drawerfit: design single-supply BJT stages from the parts in your drawer."""

__version__ = "0.1.0"
