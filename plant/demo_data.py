"""The invented demo plant's duties, areas, meters and makers: read by the demo builder and by the synthetic
fleet, which varies them. All names are invented."""

FLUIDS = [
    # name, phase, conductivity, density, viscosity, solids, chlorides, scaling, slime, sticky, gas, temp
    ("Pickling brine", "liquid", 60000, 1150, 1.6, False, True, False, False, False, False, 15),
    ("Town makeup water", "liquid", 450, 998, 1.0, False, False, True, True, False, False, 12),
    ("Saturated steam 8 bar", "steam", None, 4.7, 0.015, False, False, False, False, False, False, 175),
    ("Natural gas 4 bar", "gas", None, 3.5, 0.011, False, False, False, False, False, False, 10),
    ("Caustic cleaning solution 2 %", "liquid", 90000, 1020, 1.1, False, False, False, False, False, False, 75),
    ("Sugar syrup 65 Brix", "liquid", 30, 1320, 150.0, False, False, False, False, True, False, 40),
    ("Vegetable oil", "liquid", 0.0001, 915, 50.0, False, False, False, False, True, False, 25),
    ("Compressed air 7 bar", "gas", None, 9.4, 0.018, False, False, False, False, False, False, 25),
    ("Tomato pulp slurry", "slurry", 4000, 1050, 300.0, True, False, False, False, True, False, 60),
    ("Demineralised water", "liquid", 1.0, 998, 1.0, False, False, False, False, False, False, 20),
    ("Cooling tower water", "liquid", 1800, 998, 0.9, True, True, True, True, False, False, 30),
]

AREAS = ["Brine & pickling", "Boiler house", "Syrup kitchen", "Oil & frying", "CIP station", "Utilities", "Pulp line"]

# tag prefix, principle, fluid, area, line size, ID mm, range max, units, material, mpe, basis
METERS = [
    ("FT-110", "electromagnetic", "Pickling brine", "Brine & pickling", "DN50", 52.5, 40, "m3/h", "316L", 0.5, "pct_reading"),
    ("FT-111", "electromagnetic", "Pickling brine", "Brine & pickling", "DN40", 40.9, 25, "m3/h", "alloy C-276", 0.5, "pct_reading"),
    ("FT-112", "coriolis", "Pickling brine", "Brine & pickling", "DN25", 26.6, 8, "m3/h", "316L", 0.2, "pct_reading"),
    ("FT-113", "ultrasonic_clampon", "Pickling brine", "Brine & pickling", "DN80", 82.5, 60, "m3/h", "", 2.0, "pct_reading"),
    ("FT-114", "turbine", "Pickling brine", "Brine & pickling", "DN25", 26.6, 10, "m3/h", "316", 0.5, "pct_reading"),
    ("FT-201", "vortex", "Saturated steam 8 bar", "Boiler house", "DN80", 77.9, 4000, "kg/h", "316L", 1.0, "pct_reading"),
    ("FT-202", "vortex", "Saturated steam 8 bar", "Boiler house", "DN50", 52.5, 1500, "kg/h", "316L", 1.0, "pct_reading"),
    ("FT-203", "orifice", "Saturated steam 8 bar", "Boiler house", "DN100", 102.3, 6000, "kg/h", "316", 2.0, "pct_span"),
    ("FT-204", "electromagnetic", "Town makeup water", "Boiler house", "DN50", 52.5, 30, "m3/h", "316L", 0.5, "pct_reading"),
    ("FT-205", "venturi", "Town makeup water", "Boiler house", "DN80", 82.5, 50, "m3/h", "316", 1.0, "pct_span"),
    ("FT-206", "electromagnetic", "Demineralised water", "Boiler house", "DN25", 26.6, 5, "m3/h", "316L", 0.5, "pct_reading"),
    ("FT-207", "coriolis", "Demineralised water", "Boiler house", "DN25", 26.6, 5, "m3/h", "316L", 0.2, "pct_reading"),
    ("FT-208", "thermal_mass", "Natural gas 4 bar", "Boiler house", "DN50", 52.5, 300, "m3/h", "316L", 1.5, "pct_reading"),
    ("FT-209", "ultrasonic_transit", "Natural gas 4 bar", "Boiler house", "DN100", 102.3, 800, "m3/h", "316", 1.0, "pct_reading"),
    ("FT-210", "turbine", "Natural gas 4 bar", "Boiler house", "DN80", 77.9, 600, "m3/h", "aluminium", 1.0, "pct_reading"),
    ("FT-301", "coriolis", "Sugar syrup 65 Brix", "Syrup kitchen", "DN40", 40.9, 12000, "kg/h", "316L", 0.15, "pct_reading"),
    ("FT-302", "positive_displacement", "Sugar syrup 65 Brix", "Syrup kitchen", "DN40", 40.9, 8, "m3/h", "316", 0.5, "pct_reading"),
    ("FT-303", "electromagnetic", "Sugar syrup 65 Brix", "Syrup kitchen", "DN40", 40.9, 8, "m3/h", "316L", 0.5, "pct_reading"),
    ("FT-304", "vortex", "Sugar syrup 65 Brix", "Syrup kitchen", "DN25", 26.6, 6, "m3/h", "316L", 1.0, "pct_reading"),
    ("FT-305", "electromagnetic", "Town makeup water", "Syrup kitchen", "DN25", 26.6, 6, "m3/h", "316L", 0.5, "pct_reading"),
    ("FT-401", "electromagnetic", "Vegetable oil", "Oil & frying", "DN50", 52.5, 20, "m3/h", "316L", 0.5, "pct_reading"),
    ("FT-402", "coriolis", "Vegetable oil", "Oil & frying", "DN40", 40.9, 15000, "kg/h", "316L", 0.15, "pct_reading"),
    ("FT-403", "positive_displacement", "Vegetable oil", "Oil & frying", "DN40", 40.9, 15, "m3/h", "316", 0.3, "pct_reading"),
    ("FT-404", "turbine", "Vegetable oil", "Oil & frying", "DN25", 26.6, 6, "m3/h", "316", 0.5, "pct_reading"),
    ("FT-405", "thermal_mass", "Natural gas 4 bar", "Oil & frying", "DN40", 40.9, 150, "m3/h", "316L", 1.5, "pct_reading"),
    ("FT-501", "electromagnetic", "Caustic cleaning solution 2 %", "CIP station", "DN50", 52.5, 30, "m3/h", "316L", 0.5, "pct_reading"),
    ("FT-502", "electromagnetic", "Caustic cleaning solution 2 %", "CIP station", "DN50", 52.5, 30, "m3/h", "316L", 0.5, "pct_reading"),
    ("FT-503", "coriolis", "Caustic cleaning solution 2 %", "CIP station", "DN25", 26.6, 6000, "kg/h", "316L", 0.2, "pct_reading"),
    ("FT-504", "electromagnetic", "Town makeup water", "CIP station", "DN50", 52.5, 30, "m3/h", "316L", 0.5, "pct_reading"),
    ("FT-505", "vortex", "Town makeup water", "CIP station", "DN50", 52.5, 30, "m3/h", "316L", 1.0, "pct_reading"),
    ("FT-601", "averaging_pitot", "Cooling tower water", "Utilities", "DN200", 202.7, 400, "m3/h", "316", 2.0, "pct_span"),
    ("FT-602", "electromagnetic", "Cooling tower water", "Utilities", "DN150", 154.1, 250, "m3/h", "316L", 0.5, "pct_reading"),
    ("FT-603", "orifice", "Cooling tower water", "Utilities", "DN150", 154.1, 250, "m3/h", "316", 2.0, "pct_span"),
    ("FT-604", "pitot", "Compressed air 7 bar", "Utilities", "DN100", 102.3, 1200, "m3/h", "316", 3.0, "pct_span"),
    ("FT-605", "thermal_mass", "Compressed air 7 bar", "Utilities", "DN80", 82.5, 900, "m3/h", "316L", 1.5, "pct_reading"),
    ("FT-606", "vortex", "Compressed air 7 bar", "Utilities", "DN50", 52.5, 500, "m3/h", "316L", 1.0, "pct_reading"),
    ("FT-607", "ultrasonic_clampon", "Town makeup water", "Utilities", "DN150", 154.1, 200, "m3/h", "", 2.0, "pct_reading"),
    ("FT-608", "ultrasonic_transit", "Town makeup water", "Utilities", "DN100", 102.3, 100, "m3/h", "316", 0.5, "pct_reading"),
    ("FT-701", "electromagnetic", "Tomato pulp slurry", "Pulp line", "DN80", 82.5, 50, "m3/h", "316L", 0.5, "pct_reading"),
    ("FT-702", "coriolis", "Tomato pulp slurry", "Pulp line", "DN50", 52.5, 40000, "kg/h", "316L", 0.2, "pct_reading"),
    ("FT-703", "turbine", "Tomato pulp slurry", "Pulp line", "DN50", 52.5, 40, "m3/h", "316", 0.5, "pct_reading"),
    ("FT-704", "ultrasonic_transit", "Tomato pulp slurry", "Pulp line", "DN80", 82.5, 50, "m3/h", "316", 1.0, "pct_reading"),
    ("FT-705", "electromagnetic", "Tomato pulp slurry", "Pulp line", "DN80", 82.5, 50, "m3/h", "alloy C-276", 0.5, "pct_reading"),
    ("FT-706", "venturi", "Tomato pulp slurry", "Pulp line", "DN80", 82.5, 50, "m3/h", "316", 1.5, "pct_span"),
]

# what the list of wetted materials does not say (the magnetic meters' liners)
DETAILS = {"FT-705": "PTFE liner"}

MAKERS = ["Northbeck Instruments", "Calder & Wray", "Tessel Flow", "Orrin Metering"]
