"""Pure computation: plain functions over numbers and numpy arrays, no Django, no clock, no settings.

Where each figure is computed:

- ``exposure``      dust weighting and accumulation of usage since a service
- ``triggers``      due status of a trigger and of a plan (whichever comes first)
- ``nights``        sunset, sunrise, astronomical dusk and dawn, dark hours, Moon (astropy)
- ``forecast``      expected usage per future night and the date each trigger is reached
- ``trend``         robust trend of readings toward a limit (condition triggers)
- ``coating``       fresh-coating reflectance by the characteristic-matrix method
- ``reflectance``   decline of measured mirror reflectance against dust-weighted exposure
- ``windows``       cost of losing each night and the cheapest downtime window
- ``lifting``       mirror mass, suspended load and sling leg tension
"""
