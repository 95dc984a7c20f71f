"""calib: measure how small a random projection can make an LP, SDP or QP and still be trusted.

The data flow is one-directional: sweep spec -> trials -> store -> analysis -> safe-k tables.
"""

__version__ = "0.1.0"

#: Version of the trial-identity and store layout. Part of every trial id: bump it when a change
#: alters the numbers a trial produces, so old and new rows are never mixed in one campaign.
SCHEMA_VERSION = 2
