"""tubulo: offline clinical reasoning about the renal tubule.

Decision support only: every ranked or advised output is to be weighed by a licensed clinician
under local protocols.
"""

__version__ = "0.1.0"
__all__ = ["__version__"]
