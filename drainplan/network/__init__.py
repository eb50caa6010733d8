"""The drainage network: one tree per outlet point, from the laterals through
sub-mains, mains and the trunk to the outlet, graded on the terrain.

Modules
-------
hydraulics
    Design flow, full-pipe capacity (Manning, drain-pipe power laws), size
    series and size selection (plain numpy).
routing
    Sub-mains for lateral pieces cut off from their main, and the trunk that
    joins several fields' mains to one outlet point (shapely).
design
    The network as a graph: flows accumulated to the outlet, the vertical
    design from the outlet up, sizes and checks.
takeoff
    Quantities a contractor orders: perforated and solid pipe, envelope,
    fittings, per field and for the job.
plan
    The job: a layout GeoPackage and elevations in, schedule and layers out.

``import drainplan.network`` loads nothing heavy; import the module you need.
"""
