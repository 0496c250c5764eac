"""bladesolid: mass properties and centrifugal loads of rotating blades.

The pipeline, one module per stage (data flows one way)::

    io -> mesh -> moments -> frame -> loads -> span -> fields -> views / report

`bladesolid.api` holds the documented high-level functions that the command line uses.
Results are engineering estimates, not airworthiness or certification data.
"""

__version__ = "0.1.0"

CAUTION = (
    "Results are engineering estimates, not airworthiness or certification data. "
    "Defer to the type-certificate holder's or manufacturer's data, the applicable "
    "regulations and codes, and licensed engineers and repair stations."
)
