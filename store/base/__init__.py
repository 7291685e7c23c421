"""Ground floor: errors, time and shifts, units, text hygiene, value checks, laptop preferences.
Imports nothing else of the store."""
