//! The bad-input catalogue: each case is a script a user could write, run as a user
//! runs it (`stagna run SCRIPT INPUT -o OUT`). Each must fail with a message that
//! names what to fix (the fragments below), and nothing already written may be lost:
//! the input file and an earlier result in the output folder stay byte for byte, and no
//! temporary file is left behind. Regression suite of issue 16.

use std::path::{Path, PathBuf};
use std::process::Command;

/// (script, fragments its error message must contain, compared case-insensitively).
const CASES: &[(&str, &[&str])] = &[
    (r##"qty("12 furlongs")"##, &[r##"unknown unit 'furlongs'"##, r##"known units include"##]),
    (r##"qty("abc")"##, &[r##"expected a number followed by a unit"##]),
    (r##"qty("")"##, &[r##"expected a number followed by a unit"##]),
    (r##"qty("3 inH2O@61F")"##, &[r##"did you mean 'inh2o@60f'"##]),
    (r##"qty("1e400 Pa")"##, &[r##"1e400 pa"##, r##"too large"##]),
    (r##"qty("1 m^100*m^100")"##, &[r##"±127"##]),
    (r##"1.m + 1.s"##, &[r##"cannot add a length"##, r##"a time"##, r##"different dimensions"##]),
    (r##"1.m + 5"##, &[r##"plain number (5)"##, r##"5.m"##]),
    (r##"5 + 1.m"##, &[r##"plain number (5)"##]),
    (r##"1.m / 0"##, &[r##"not a finite number"##, r##"division by zero"##]),
    (r##"1.m / 0.m"##, &[r##"not a finite number"##]),
    (r##"1.m.to("Pa")"##, &[r##"conversion to 'pa'"##, r##"length"##, r##"pressure"##]),
    (r##"20.degC + 5.degC"##, &[r##"two absolute temperatures"##, r##"delta_degc"##]),
    (r##"(20.degC).to("delta_K")"##, &[r##"absolute temperature"##, r##"difference unit"##]),
    (r##"1.m ** 20"##, &[r##"powers go from -8 to 8"##]),
    (r##"((1.m**8)**8)**2"##, &[r##"±127"##]),
    (r##"-(20.degC)"##, &[r##"cannot negate an absolute temperature"##]),
    (r##"1.2.kg_m3 < 3.m"##, &[r##"cannot compare a density"##, r##"a length"##]),
    (r##"humid_air(1.5)"##, &[r##"relative humidity"##, r##"[0, 1]"##, r##"45.percent"##, r##"1.5"##]),
    (r##"humid_air(-0.1)"##, &[r##"relative humidity"##, r##"-0.1"##]),
    (r##"humid_air("wet")"##, &[r##"relative humidity"##, r##"expected a number"##, r##""wet""##]),
    (r##"humid_air_from_dew_point(20.m)"##, &[r##"dew point must be a temperature"##, r##"length"##]),
    (r##"water().state(-5.kPa, 20.degC)"##, &[r##"pressure"##, r##"-5000 pa"##, r##"absolute pressure, not gauge"##]),
    (r##"water().state(101.kPa, 20.m)"##, &[r##"temperature must be a temperature"##, r##"length"##]),
    (r##"water().state(101.kPa, 500.degC)"##, &[r##"500 °c"##, r##"0–350 °c"##]),
    (r##"water().state(101.kPa, 5.delta_K)"##, &[r##"absolute temperature"##, r##"temperature difference"##]),
    (r##"dry_air().state(0.Pa, 20.degC)"##, &[r##"absolute pressure must be greater than 0"##]),
    (r##"dry_air().state(101.kPa, -300.degC)"##, &[r##"temperature must be greater than 0"##, r##"-26.85 k"##]),
    (r##"flue_gas(120.0, 6.0, 0.0, 0.1)"##, &[r##"co2 percentage"##, r##"[0, 100]"##, r##"120"##]),
    (r##"flue_gas(12.0, 6.0, 0.0, 1.2)"##, &[r##"moisture"##, r##"[0, 1]"##, r##"1.2"##]),
    (r##"flue_gas(-1.0, 6.0, 0.0, 0.1)"##, &[r##"co2 percentage"##, r##"-1"##]),
    (r##"gas_mixture(#{co2: 10.0, xenonium: 5.0}, 0.05)"##, &[r##"unknown component 'xenonium'"##, r##"known: n2"##]),
    (r##"gas_mixture(#{co2: 150.0}, 0.05)"##, &[r##"component fraction"##, r##"1.5"##]),
    (r##"ideal_gas("x", -28.kg_kmol, 1.4)"##, &[r##"molar mass must be greater than 0"##]),
    (r##"ideal_gas("x", 28.kg_kmol, 0.5)"##, &[r##"gamma must be in (1, 2)"##, r##"0.5"##]),
    (r##"gauge_liquid("oil", -800.kg_m3, 20.degC, 0.0007)"##, &[r##"density must be greater than 0"##, r##"-800"##]),
    (
        r##"gauge_liquid("oil", 800.kg_m3, 20.m, 0.0007)"##,
        &[r##"reference temperature must be a temperature"##, r##"length"##],
    ),
    (r##"gauge_mercury().density(20.m)"##, &[r##"temperature must be a temperature"##]),
    (r##"gauge_water().density(80.degC)"##, &[r##"80 °c"##, r##"0–40 °c"##, r##"iapws-if97"##]),
    (
        r##"u_tube(gauge_mercury()).dp(5.Pa, 20.degC, 1.2.kg_m3)"##,
        &[r##"deflection must be a length"##, r##"pressure"##],
    ),
    (
        r##"u_tube(gauge_mercury()).dp(5.mm, 20.degC, 20000.kg_m3)"##,
        &[r##"must exceed the working fluid"##, r##"inverted u-tube"##],
    ),
    (
        r##"inverted_u_tube(gauge_water()).dp(5.mm, 20.degC, 1.2.kg_m3)"##,
        &[r##"must be below the working fluid"##, r##"inverted u-tube"##],
    ),
    (r##"inclined_gauge(gauge_water(), 0.0, 0.01)"##, &[r##"tube angle"##, r##"(0, 90]"##, r##"got 0"##]),
    (r##"inclined_gauge(gauge_water(), 95.0, 0.01)"##, &[r##"tube angle"##, r##"got 95"##]),
    (r##"inclined_gauge(gauge_water(), 20.0, -0.01)"##, &[r##"area ratio a/a"##, r##"-0.01"##]),
    (r##"well_gauge(gauge_water(), 2.0)"##, &[r##"area ratio a/a"##, r##"got 2"##]),
    (
        r##"two_liquid_gauge(gauge_water(), gauge_mercury(), 0.01).dp(5.mm, 20.degC, 1.2.kg_m3)"##,
        &[r##"heavy liquid density"##, r##"must exceed light liquid density"##],
    ),
    (r##"u_tube(gauge_mercury()).at_site(95.0, 10.m)"##, &[r##"latitude"##, r##"[-90, 90]"##, r##"95"##]),
    (r##"u_tube(gauge_mercury()).at_site(45.0, 50000.m)"##, &[r##"elevation"##, r##"50000"##]),
    (r##"pitot_static(-1.0)"##, &[r##"coefficient must be in [0.5, 1.2]"##, r##"-1"##]),
    (r##"pitot_static(5.0)"##, &[r##"coefficient must be in [0.5, 1.2]"##, r##"got 5"##]),
    (r##"s_type(0.0)"##, &[r##"coefficient"##, r##"got 0"##]),
    (r##"pitot_static(0.99).velocity(100.m, 1.2.kg_m3)"##, &[r##"dp must be a pressure"##, r##"length"##]),
    (
        r##"pitot_static(0.99).velocity(100.Pa, -1.2.kg_m3)"##,
        &[r##"fluid density must be greater than 0"##, r##"-1.2"##],
    ),
    (r##"pitot_static(0.99).velocity(100.Pa, 0.kg_m3)"##, &[r##"fluid density must be greater than 0"##]),
    (
        r##"pitot_static(0.99).velocity(100.Pa, 1.2)"##,
        &[r##"density must be a density with a unit"##, r##"plain number 1.2"##, r##"write e.g."##],
    ),
    (r##"pitot_static(0.99).head_diameter(-8.mm)"##, &[r##"head diameter must be greater than 0"##]),
    (r##"round_section(-1.m)"##, &[r##"diameter must be greater than 0"##, r##"-1 m"##]),
    (r##"round_section(0.m)"##, &[r##"diameter must be greater than 0"##]),
    (r##"round_section([])"##, &[r##"no diameters given"##]),
    (r##"round_section([1.m, -1.m])"##, &[r##"diameter must be greater than 0"##]),
    (r##"round_section(1.s)"##, &[r##"diameter must be a length"##, r##"time"##]),
    (r##"rect_section(1.m, 0.m)"##, &[r##"height must be greater than 0"##]),
    (r##"rect_section(1.m, -2.m)"##, &[r##"height must be greater than 0"##, r##"-2 m"##]),
    (r##"round_section(1.m).roughness(-0.1.mm)"##, &[r##"roughness must be 0 or more"##]),
    (r##"round_section(1.m).roughness(2.m)"##, &[r##"roughness must be below a quarter of the hydraulic diameter"##]),
    (r##"round_section(1.m).friction_factor(-100.0)"##, &[r##"reynolds number must be greater than 0"##, r##"-100"##]),
    (r##"power_law(0.0)"##, &[r##"power-law exponent n"##, r##"(1, 20]"##]),
    (r##"power_law(-7)"##, &[r##"power-law exponent n"##, r##"-7"##]),
    (r##"profile_for(-2e5, 1e-4, "log-law")"##, &[r##"reynolds number must be greater than 0"##]),
    (r##"profile_for(2e5, 1e-4, "cubic")"##, &[r##""power-law" or "log-law""##, r##""cubic""##]),
    (
        r##"single_point(2.m_s, water().state(350.kPa, 11.degC), round_section(400.mm), #{colour: 1})"##,
        &[r##"unknown option 'colour'"##, r##"options are: family"##],
    ),
    (
        r##"single_point(2.m_s, water().state(350.kPa, 11.degC), rect_section(1.m, 1.m), #{})"##,
        &[r##"circular pipes only"##],
    ),
    (
        r##"single_point(-2.m_s, water().state(350.kPa, 11.degC), round_section(400.mm), #{})"##,
        &[r##"centreline velocity must be greater than 0"##],
    ),
    (
        r##"flow(2.m_s, round_section(1.m), dry_air().state(101.kPa, 20.degC), #{reference: "martian"})"##,
        &[r##"unknown name 'martian'"##, r##"normal_0c"##],
    ),
    (
        r##"flow(2.m_s, round_section(1.m), dry_air().state(101.kPa, 20.degC), #{moisture: 1.5})"##,
        &[r##"moisture"##, r##"1.5"##],
    ),
    (
        r##"flow(2.m_s, round_section(1.m), dry_air().state(101.kPa, 20.degC), #{wall_factor: 1.5})"##,
        &[r##"wall adjustment factor"##, r##"[0.9, 1]"##, r##"1.5"##],
    ),
    (
        r##"flow(2.m_s, round_section(1.m), dry_air().state(101.kPa, 20.degC), #{speed: 3})"##,
        &[r##"unknown option 'speed'"##, r##"options are: reference"##],
    ),
    (
        r##"flow(2.Pa, round_section(1.m), dry_air().state(101.kPa, 20.degC), #{})"##,
        &[r##"mean velocity must be a velocity"##, r##"pressure"##],
    ),
    (
        r##"traverse_layout(round_section(1.m), #{points: 7})"##,
        &[r##"points per diameter must be even"##, r##"got 7"##],
    ),
    (r##"traverse_layout(round_section(1.m), #{points: 0})"##, &[r##"points per diameter"##, r##"got 0"##]),
    (
        r##"traverse_layout(round_section(1.m), #{points: 100000000})"##,
        &[r##"points per diameter"##, r##"at most 200"##],
    ),
    (r##"traverse_layout(round_section(1.m), #{diameters: 9})"##, &[r##"1 to 8 diameters"##, r##"got 9"##]),
    (r##"traverse_layout(round_section(1.m), #{rule: "random"})"##, &[r##""equal-area""##, r##""random""##]),
    (
        r##"traverse_layout(round_section(1.m), #{points: 6, port_length: -5.mm})"##,
        &[r##"port length"##, r##"0 or more"##, r##"-5 mm"##],
    ),
    (r##"traverse_layout(rect_section(1.m, 0.5.m), #{total: 13})"##, &[r##"no 13-point matrix"##, r##"use 9, 12"##]),
    (
        r##"traverse_layout(rect_section(1.m, 0.5.m), #{rule: "log-linear"})"##,
        &[r##"log-linear rule is for circular sections"##],
    ),
    (
        r##"traverse_layout(rect_section(1.m, 0.5.m), #{rule: "log-chebyshev", columns: 9, rows: 5})"##,
        &[r##"5, 6 or 7 points per side"##, r##"not 9"##],
    ),
    (
        r##"traverse_layout(rect_section(1.m, 0.5.m), #{columns: 0})"##,
        &[r##"columns"##, r##"from 1 to 200"##, r##"got 0"##],
    ),
    (
        r##"traverse_layout(round_section(1.m), #{shape: 1})"##,
        &[r##"unknown option 'shape'"##, r##"options are: rule"##],
    ),
    (r##"epa_min_points(round_section(1.m), -1.0, 2.0)"##, &[r##"-1.00 d downstream"##, r##"alternative procedure"##]),
    (r##"epa_min_points(round_section(0.1.m), 8.0, 2.0)"##, &[r##"does not apply below 0.30 m"##, r##"method 1a"##]),
    (r##"read_csv("@OUTSIDE@/missing/file.csv")"##, &[r##"missing/file.csv"##, r##"cannot open"##]),
    (r##"read_parquet(input)"##, &[r##"precious.csv"##, r##"not a readable parquet file"##]),
    (r##"read_excel(input)"##, &[r##"precious.csv"##, r##"not a readable workbook"##]),
    (r##"read_table("x.json")"##, &[r##"unknown table format '.json'"##, r##"csv, parquet"##]),
    (r##"read_table("@OUTSIDE@")"##, &[r##"is a folder"##, r##"stagna run script folder/*.csv"##]),
    (r##"read_excel("@OUTSIDE@/missing.xlsx", "Sheet9")"##, &[r##"missing.xlsx"##, r##"cannot open"##]),
    (r##"table_from(#{a: [1.0, 2.0], b: [1.0]})"##, &[r##"column 'b'"##, r##"does not match"##, r##"column 'a'"##]),
    (r##"table_from(#{})"##, &[r##"no columns"##, r##"#{h: [12.5, 14.0]}"##]),
    (
        r##"table_from(#{a: [1.0]}).unit("b", "mm")"##,
        &[r##"column 'b'"##, r##"no such column"##, r##"the table has: a"##],
    ),
    (r##"table_from(#{a: [1.0]}).unit("a", "furlong")"##, &[r##"unknown unit 'furlong'"##]),
    (r##"table_from(#{a: ["x"]}).unit("a", "mm")"##, &[r##"column 'a'"##, r##"not numbers"##]),
    (r##"table_from(#{a: [1.0]})["b"]"##, &[r##"column 'b'"##, r##"no such column"##]),
    (
        r##"table_from(#{a: [1.0]}).filter(col("b") > 1.0)"##,
        &[r##"unable to find column "b""##, r##"valid columns: ["a"]"##],
    ),
    (r##"table_from(#{a: [1.0]}).select(["a", "zz"])"##, &[r##"unable to find column "zz""##]),
    (r##"table_from(#{a: [1.0]}).sort("zz", false)"##, &[r##"unable to find column "zz""##]),
    (r##"table_from(#{a: [1.0]}).head(-1)"##, &[r##"head"##, r##"0 or more"##, r##"-1"##]),
    (r##"table_from(#{a: [1.0]}).group_by("zz").agg([col("a").mean()])"##, &[r##"unable to find column "zz""##]),
    (
        r##"table_from(#{a: [1.0]}).write("out.xyz")"##,
        &[r##"cannot write '.xyz' tables"##, r##"csv, parquet or xlsx"##],
    ),
    (
        r##"table_from(#{a: [1.0]}).write("@OUTSIDE@/escape.csv")"##,
        &[r##"outside the folders this session may write"##, r##"--allow-write"##],
    ),
    (r##"table_from(#{a: [1.0]}).write("../escape.csv")"##, &[r##"outside the folders this session may write"##]),
    (r##"table_from(#{a: [1.0]}).write(input)"##, &[r##"outside the folders this session may write"##]),
    (r##"table_from(#{a: [1.0]}).distinct("zz")"##, &[r##"column 'zz'"##, r##"no such column"##]),
    (r##"table_from(#{a: [1.0, 2.0]}).unit("a", "mm")["a"].at(5)"##, &[r##"row 5"##, r##"2 rows"##]),
    (r##"table_from(#{a: [1.0, 2.0]}).unit("a", "mm")["a"].to("Pa")"##, &[r##"conversion to 'pa'"##, r##"length"##]),
    (
        r##"table_from(#{a: [-1.0, 2.0]}).unit("a", "Pa")["a"].mean_of_sqrt("Pa")"##,
        &[r##"row 1"##, r##"velocity head must be 0 or more"##],
    ),
    (
        r##"table_from(#{a: [1.0, 2.0]}).unit("a", "mm")["a"] + table_from(#{a: [1.0]}).unit("a", "mm")["a"]"##,
        &[r##"2 rows"##, r##"1 rows"##, r##"differ in length"##],
    ),
    (
        r##"table_from(#{a: [1.0]}).unit("a", "mm")["a"] + table_from(#{a: [1.0]}).unit("a", "s")["a"]"##,
        &[r##"addition"##, r##"length"##, r##"time"##],
    ),
    (r##"table_from(#{a: [1.0]}).unit("a", "mm")["a"] / 0.0"##, &[r##"row 1"##, r##"not a finite number"##]),
    (r##"table_from(#{v: [1.5]}).unit("v", "m/s")["v"].std()"##, &[r##"standard deviation needs at least 2 values"##]),
    (
        r##"table_from(#{v: [1.0, 2.0]}).with_column("v", col("v") / (col("v") - 2.0) * 0.0).unit("v", "m/s")["v"].mean()"##,
        &[r##"row 2"##, r##"empty or not a number"##, r##"drop_missing"##],
    ),
    (r##"read_csv(input, #{separator: ";;"})"##, &[r##"separator must be one ascii character"##]),
    (r##"read_csv(input, #{separator: ",", decimal_comma: true})"##, &[r##"separator: ";""##]),
    (r##"read_csv(input, #{quote: "x"})"##, &[r##"unknown option 'quote'"##, r##"options are: separator"##]),
    (r##"reduce_campaign(table_from(#{a: [1.0]}), #{})"##, &[r##"option 'fluid' is required"##]),
    (
        r##"reduce_campaign(table_from(#{a: [1.0]}), #{fluid: 5})"##,
        &[r##"'fluid' must be a fluid"##, r##"humid_air(0.45)"##],
    ),
    (
        r##"point_velocities(table_from(#{tr: ["T1"], h: [1.0]}), #{fluid: dry_air(), static_pressure: 101.kPa, manometer: u_tube(gauge_water()), probe: pitot_static(1.0), columns: #{traverse: "tr", deflection: "h", fluid_temperature: "t", size: "d"}})"##,
        &[r##"column 'h' (for deflection) has no unit"##, r##"t.unit("h""##],
    ),
    (
        r##"point_velocities(table_from(#{tr: ["T1"], h: [1.0], t: [20.0], d: [500.0]}).units(#{h: "mm", t: "degC", d: "mm"}), #{fluid: dry_air(), static_pressure: 101.kPa, manometer: u_tube(gauge_water()), probe: pitot_static(1.0), columns: #{traverse: "tr", deflection: "h", fluid_temperature: "t", size: "d", colour: "c"}})"##,
        &[r##"unknown option 'colour'"##, r##"options are: traverse"##],
    ),
    (
        r##"point_velocities(table_from(#{tr: ["T1"], h: [1.0], t: [20.0], d: [500.0]}).units(#{h: "Pa", t: "degC", d: "mm"}), #{fluid: dry_air(), static_pressure: 101.kPa, manometer: u_tube(gauge_water()), probe: pitot_static(1.0), columns: #{traverse: "tr", deflection: "h", fluid_temperature: "t", size: "d"}})"##,
        &[r##"column 'h' (for deflection) is in pa"##, r##"not a length"##],
    ),
    (
        r##"point_velocities(table_from(#{tr: ["T1"], h: [1.0], t: [20.0], d: [500.0]}).units(#{h: "mm", t: "degC", d: "mm"}), #{fluid: dry_air(), static_pressure: 101.kPa, manometer: u_tube(gauge_water()), probe: pitot_static(1.0), columns: #{traverse: "tr", deflection: "h", fluid_temperature: "zz", size: "d"}})"##,
        &[r##"column 'zz' (for fluid_temperature) is not in the table"##, r##"it has:"##],
    ),
    (
        r##"traverse_budget([], #{coefficient: 1.0, u_coefficient: 0.005, density: 1.2.kg_m3, u_density: 0.002.kg_m3, diameter: 500.mm, u_diameter: 1.mm})"##,
        &[r##"no points"##],
    ),
    (
        r##"traverse_budget([100.Pa, -5.Pa], #{coefficient: 1.0, u_coefficient: 0.005, density: 1.2.kg_m3, u_density: 0.002.kg_m3, diameter: 500.mm, u_diameter: 1.mm})"##,
        &[r##"point 2"##, r##"-5 pa"##, r##"positive δp"##],
    ),
    (r##"traverse_budget([100.Pa, 110.Pa], #{coefficient: 1.0})"##, &[r##"option 'u_coefficient' is required"##]),
    (
        r##"traverse_budget([100.Pa, 110.Pa], #{coefficient: 1.0, u_coefficient: -0.005, density: 1.2.kg_m3, u_density: 0.002.kg_m3, diameter: 500.mm, u_diameter: 1.mm})"##,
        &[r##"probe coefficient c"##, r##"must not be negative"##],
    ),
    (
        r##"traverse_budget([100.Pa, 110.Pa, 105.Pa, 98.Pa], #{coefficient: 1.0, u_coefficient: 0.005, density: 1.2.kg_m3, u_density: 0.002.kg_m3, diameter: 500.mm, u_diameter: 1.mm}).monte_carlo(10)"##,
        &[r##"trials from 10 000 to 50 000 000"##],
    ),
    (
        r##"traverse_layout(round_section(1.m), #{points: 4}).chart().save("x.doc")"##,
        &[r##"x.doc"##, r##".svg or .png"##],
    ),
    (r##"display_units("metric")"##, &[r##""si" or "us""##, r##""metric""##]),
    (r##"display_units(["m3/h", "m3/x"])"##, &[r##"display_units"##, r##"unknown unit 'x'"##]),
    (r##"display_units([3])"##, &[r##"each unit is text"##]),
    (
        r##"water().density(101.kPa, table_from(#{t: [20.0]})["t"])"##,
        &[r##"temperature must be a temperature column"##, r##"dimensionless ('t')"##],
    ),
    (r##"input("x")"##, &[r##"cannot ask for input"##, r##"--set"##]),
    (r##"let a = []; a.pad(600000000, 0);"##, &[r##"past the session's limit"##, r##"--max-array"##]),
    (r##"let x = 0; loop { x += 1; }"##, &[r##"operation limit"##, r##"--max-operations"##]),
    (r##"humid_aire(0.5)"##, &[r##"did you mean humid_air"##]),
    (r##"let t = 5; t.velocity(1)"##, &[r##"velocity"##]),
    (r##"pitot_static(0.99).velocty(100.Pa, 1.2.kg_m3)"##, &[r##"velocty"##]),
    (r##"undefined_name + 1"##, &[r##"unknown variable 'undefined_name'"##]),
    (r##"let = 5;"##, &[r##"line 1"##]),
    (r##"[1, 2"##, &[r##"line 1"##]),
    // Stack tests (issue 11): each refusal names the input to fix.
    (
        r##"s_type_calibration(0.99, [[12.0, 16.8], [10.0, 14.1]], [[12.0, 16.9], [10.0, 14.0], [15.0, 21.1]], #{probe_id: "SP-07", date: "2026-10-14"})"##,
        &[r##"side a has 2 reading(s)"##, r##"at least 3 per side"##],
    ),
    (
        r##"s_type_calibration(0.99, [[12.0, 16.8], [10.0, 14.1], [15.0, 21.0]], [[12.0, 16.9], [10.0, 14.0], [15.0, 21.1]], #{probe_id: "SP-07", date: "14/10/2026"})"##,
        &[r##"yyyy-mm-dd"##],
    ),
    (
        r##"method4_moisture(#{water_initial_ml: 200, water_final_ml: 281, gel_initial_g: 209, gel_final_g: 200, meter_volume: 0.9.m3, meter_factor: 0.998, meter_temperature: 24.degC, barometric: 745.mmHg})"##,
        &[r##"silica gel weight gain is negative"##],
    ),
    (
        r##"method4_moisture(#{water_initial_ml: 200, water_final_ml: 281, gel_initial_g: 200, gel_final_g: 209, meter_volume: 0.9.m3, meter_factor: 0.0, meter_temperature: 24.degC, barometric: 745.mmHg})"##,
        &[r##"meter factor y"##, r##"greater than 0"##],
    ),
    (r##"gauge_sensitivity([1.mmH2O, -2.mmH2O, 3.mmH2O])"##, &[r##"row 2"##, r##"velocity head must be 0 or more"##]),
    (r##"cyclonic_check([4, 95, 3])"##, &[r##"row 2"##, r##"yaw angle must be within ±90°"##]),
    (r##"let x = 5.mmH20;"##, &[r##"unknown unit 'mmH20' on a number"##, r##"did you mean mmH2O"##]),
    (r##"let x = 5.zzqq;"##, &[r##"unknown unit 'zzqq' on a number"##, r##"write 5.inch"##]),
    (
        r##"method1a_site(round_section(200.mm), #{straight_upstream_D: 9})"##,
        &[r##"option 'straight_downstream_D' is required"##],
    ),
    (
        r##"method1a_site(round_section(200.mm), #{straight_upstream_D: -1, straight_downstream_D: 3})"##,
        &[r##"straight length upstream of the site must be 0 or more"##],
    ),
    (r##"method1a_steady_flow(0.4.m3_s, 12.m_s)"##, &[r##"same kind of quantity"##]),
    (
        r##"let t = table_from(#{tr: ["T1","T1","T1","T1"], h: [20.0, 30.0, 30.0, 20.0], t: [150.0, 150.0, 150.0, 150.0], d: [500.0, 500.0, 500.0, 500.0]}).units(#{h: "mm", t: "degC", d: "mm"}); reduce_campaign(t, #{fluid: flue_gas(12, 6, 0, 0.1), static_pressure: 101.kPa, manometer: u_tube(gauge_water()), probe: s_type(0.84), columns: #{traverse: "tr", deflection: "h", fluid_temperature: "t", size: "d"}, method2: #{report: "best"}})"##,
        &[r##"method2.report: 'best' unknown"##, r##""physics" or "method""##],
    ),
    (
        r##"let t = table_from(#{tr: ["T1","T1","T1","T1"], h: [20.0, 30.0, 30.0, 20.0], t: [150.0, 150.0, 150.0, 150.0], d: [500.0, 500.0, 500.0, 500.0]}).units(#{h: "mm", t: "degC", d: "mm"}); reduce_campaign(t, #{fluid: flue_gas(12, 6, 0, 0.1), static_pressure: 101.kPa, manometer: u_tube(gauge_water()), probe: s_type(0.84), columns: #{traverse: "tr", deflection: "h", fluid_temperature: "t", size: "d"}, method2: #{}})"##,
        &[r##"no dry molecular weight m_d"##, r##"method2: #{md: ...}"##],
    ),
    (
        r##"method2_run(#{dp: [10.mmH2O, 12.mmH2O, 14.mmH2O], stack_temperature: 150.degC, barometric: 760.mmHg, static_pressure: 0.Pa, co2: 12, o2: 6, n2_co: 82, moisture: 1.0, probe: s_type(0.84), diameter: 1.5.m})"##,
        &[r##"b_ws must be in [0, 1)"##],
    ),
    (
        r##"method2_run(#{dp: [10.mmH2O, 12.mmH2O, 14.mmH2O], stack_temperature: 150.degC, barometric: 760.mmHg, static_pressure: 0.Pa, co2: 12, o2: 6, n2_co: 82, moisture: 0.1, probe: s_type(0.84), diameter: 0.8.m, wall: "other"})"##,
        &[r##"below 1.0 m"##, r##"method 2h"##],
    ),
    (r##"load_calibration("no-such-calibration.toml")"##, &[r##"no-such-calibration.toml"##, r##"cannot read"##]),
    (
        r##"let t = table_from(#{tr: ["T1","T1","T1","T1"], h: [20.0, 30.0, 30.0, 20.0], t: [20.0, 20.0, 20.0, 20.0], d: [500.0, 500.0, 500.0, 500.0]}).units(#{h: "mm", t: "degC", d: "mm"}); reduce_campaign(t, #{fluid: dry_air(), static_pressure: 101.kPa, manometer: u_tube(gauge_water()), probe: pitot_static(1.0), columns: #{traverse: "tr", deflection: "h", fluid_temperature: "t", size: "d"}, runs: table_from(#{run: ["T1"], p: [100.0]})})"##,
        &[r##"needs the traverse column 'tr'"##],
    ),
    (
        r##"let t = table_from(#{tr: ["T1","T1","T1","T1"], h: [20.0, 30.0, 30.0, 20.0], t: [20.0, 20.0, 20.0, 20.0], d: [500.0, 500.0, 500.0, 500.0]}).units(#{h: "mm", t: "degC", d: "mm"}); reduce_campaign(t, #{fluid: dry_air(), static_pressure: 101.kPa, manometer: u_tube(gauge_water()), probe: pitot_static(1.0), columns: #{traverse: "tr", deflection: "h", fluid_temperature: "t", size: "d"}, runs: table_from(#{tr: ["T1"], static_pressure: [100.0], barometric: [101.0]}).units(#{static_pressure: "kPa", barometric: "kPa"})})"##,
        &[r##"absolute static_pressure, or barometric with static_gauge, not both"##],
    ),
];

fn tempdir(tag: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("stagna-catalogue-{tag}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).expect("temp dir");
    d
}

fn leftovers(dir: &Path) -> Vec<PathBuf> {
    let mut out = Vec::new();
    if let Ok(entries) = std::fs::read_dir(dir) {
        for e in entries.flatten() {
            let p = e.path();
            if p.is_dir() {
                out.extend(leftovers(&p));
            } else if p.to_string_lossy().ends_with(".stagna-tmp") {
                out.push(p);
            }
        }
    }
    out
}

#[test]
fn every_bad_input_is_refused_naming_what_to_fix_and_nothing_is_lost() {
    assert!(CASES.len() >= 100, "the catalogue holds at least 100 cases");
    let root = tempdir("run");
    let chunks: Vec<&[(&str, &[&str])]> = CASES.chunks(CASES.len().div_ceil(4)).collect();
    let failures: Vec<String> = std::thread::scope(|s| {
        let handles: Vec<_> = chunks
            .iter()
            .enumerate()
            .map(|(k, chunk)| {
                let root = root.clone();
                s.spawn(move || {
                    let dir = root.join(format!("worker{k}"));
                    let out = dir.join("out");
                    std::fs::create_dir_all(&out).expect("dirs");
                    let input = dir.join("precious.csv");
                    let earlier = out.join("earlier.csv");
                    std::fs::write(&input, "v\n1.5\n2.5\n").expect("input");
                    std::fs::write(&earlier, "result\n42\n").expect("earlier result");
                    let script = dir.join("case.rhai");
                    let mut failures = Vec::new();
                    for (src, fragments) in chunk.iter() {
                        // `@OUTSIDE@`: a folder of this worker's that is not its output folder.
                        let outside = dir.join("outside");
                        std::fs::create_dir_all(&outside).expect("dir");
                        std::fs::write(&script, src.replace("@OUTSIDE@", &outside.display().to_string()))
                            .expect("script");
                        let o = Command::new(env!("CARGO_BIN_EXE_stagna"))
                            .args(["run", script.to_str().unwrap_or_default(), input.to_str().unwrap_or_default()])
                            .args(["-o", out.to_str().unwrap_or_default(), "--max-operations", "1000000"])
                            .current_dir(&dir)
                            .output()
                            .expect("the stagna binary runs");
                        let stderr = String::from_utf8_lossy(&o.stderr).to_lowercase();
                        if o.status.success() {
                            failures.push(format!("{src}\n  succeeded; expected an error"));
                        }
                        for f in fragments.iter() {
                            if !stderr.contains(&f.to_lowercase()) {
                                failures.push(format!("{src}\n  message lacks {f:?}:\n{stderr}"));
                            }
                        }
                        if std::fs::read_to_string(&input).ok().as_deref() != Some("v\n1.5\n2.5\n") {
                            failures.push(format!("{src}\n  changed the input file"));
                            std::fs::write(&input, "v\n1.5\n2.5\n").expect("input");
                        }
                        if std::fs::read_to_string(&earlier).ok().as_deref() != Some("result\n42\n") {
                            failures.push(format!("{src}\n  changed an earlier result"));
                            std::fs::write(&earlier, "result\n42\n").expect("earlier result");
                        }
                        let left = leftovers(&dir);
                        if !left.is_empty() {
                            failures.push(format!("{src}\n  left temporary files: {left:?}"));
                        }
                    }
                    failures
                })
            })
            .collect();
        handles.into_iter().flat_map(|h| h.join().expect("worker")).collect()
    });
    assert!(failures.is_empty(), "{} of {} cases failed:\n{}", failures.len(), CASES.len(), failures.join("\n"));
    let escaped: Vec<PathBuf> =
        (0..chunks.len()).map(|k| root.join(format!("worker{k}/outside/escape.csv"))).filter(|p| p.exists()).collect();
    assert!(escaped.is_empty(), "a refused write landed outside the output folder: {escaped:?}");
    let _ = std::fs::remove_dir_all(&root);
}

#[test]
fn bad_command_lines_are_refused_naming_the_option() {
    let dir = tempdir("cli");
    let script = dir.join("ok.rhai");
    std::fs::write(&script, "print(1);").expect("script");
    let s = script.to_str().unwrap_or_default();
    let missing = dir.join("missing.rhai");
    let missing_input = dir.join("missing-input.csv");
    let bad_conn = dir.join("conn.json");
    std::fs::write(&bad_conn, "{\"shell_port\": \"x\"}").expect("conn");
    let cases: &[(&[&str], &[&str])] = &[
        (&["run", s, "--set", "novalue"], &["--set novalue", "name=value"]),
        (&["run", s, "--max-memory", "lots"], &["memory limit", "'lots'", "4gib"]),
        (&["run", s, "--max-memory", "4 parsecs"], &["unknown size unit 'parsecs'"]),
        (&["run", missing.to_str().unwrap_or_default()], &["missing.rhai", "cannot read the script"]),
        (&["run", s, missing_input.to_str().unwrap_or_default()], &["missing-input.csv", "no such input file"]),
        (&["run", s, "--max-operations", "many"], &["invalid value 'many'"]),
        (&["run", s, "--report", "../escape.html"], &["--report ../escape.html", "ending in .html"]),
        (&["run", s, "--report", "report.pdf"], &["--report report.pdf", "ending in .html"]),
        (&["kernel"], &["--connection-file"]),
        (&["--max-memory", "1GiB", "run", s], &["give them after `run` or `kernel`"]),
        (
            &["kernel", "--connection-file", bad_conn.to_str().unwrap_or_default()],
            &["'shell_port' must be a port number"],
        ),
        (&["layout", "--diameter=-1m"], &["diameter must be greater than 0", "-1 m"]),
        (&["layout", "--diameter", "1 furlong"], &["unknown unit"]),
    ];
    let mut failures = Vec::new();
    for (args, fragments) in cases {
        let o =
            Command::new(env!("CARGO_BIN_EXE_stagna")).args(*args).env("STAGNA_MAX_MEMORY", "").output().expect("runs");
        let err = String::from_utf8_lossy(&o.stderr).to_lowercase();
        if o.status.success() {
            failures.push(format!("{args:?} succeeded"));
        }
        for f in fragments.iter() {
            if !err.contains(&f.to_lowercase()) {
                failures.push(format!("{args:?}: message lacks {f:?}:\n{err}"));
            }
        }
    }
    // A bad limit in the environment of the kernel is named too.
    let o = Command::new(env!("CARGO_BIN_EXE_stagna"))
        .args(["run", s])
        .env("STAGNA_MAX_OPERATIONS", "ten")
        .output()
        .expect("runs");
    let err = String::from_utf8_lossy(&o.stderr);
    if o.status.success() || !err.contains("STAGNA_MAX_OPERATIONS='ten'") {
        failures.push(format!("STAGNA_MAX_OPERATIONS=ten: {err}"));
    }
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

/// A broken set-up file, as a user might leave it: each is refused with the file, the
/// line and the key, and the script stops before using anything from it (issue 15).
#[test]
fn bad_set_up_files_name_file_line_and_key() {
    const GOOD: &str = include_str!("../../demo-data/pretendbury-ahu2.setup.toml");
    let line_of = |text: &str, needle: &str| text.lines().position(|l| l.contains(needle)).map(|i| i + 1).unwrap_or(0);
    let truncated = &GOOD[..GOOD.find("liquid_density").unwrap_or(0) + 22];
    let cases: Vec<(String, &str, Vec<String>)> = vec![
        // (file text, the line's marker, further fragments)
        (truncated.to_string(), "liquid_density", vec!["liquid_density".into()]),
        (GOOD.replace("angle_deg = 20", "angle_deg = \"twenty\""), "angle_deg", vec!["angle_deg".into()]),
        (GOOD.replace("\"8 mm\"", "\"8 mmm\""), "head_diameter", vec!["'head_diameter'".into(), "mmm".into()]),
        (
            GOOD.replace(
                "points = [[0.4, 0.0], [50.9, 50.0], [101.1, 100.0], [151.8, 150.0], [202.2, 200.0], [252.0, 249.0]]",
                "points = [[0.4, 0.0]]",
            ),
            "points = [[0.4",
            vec!["'points'".into(), "at least 3 points".into()],
        ),
        (GOOD.replace("id = \"DPT-1\"", "id = \"PS-12\""), "id = \"PS-12\"\nunit", vec!["already used".into()]),
        (GOOD.replace("version = 1", "version = 9"), "version = 9", vec!["'version'".into(), "newer stagna".into()]),
        (GOOD.replace("serial = \"MN-3-551\"", "serail = \"MN-3-551\""), "serail", vec!["serail".into()]),
        (
            GOOD.replace("liquid_density = \"826 kg/m^3\"", "liquid_density = \"826 m\""),
            "liquid_density",
            vec!["not a density".into()],
        ),
    ];
    let dir = tempdir("setup");
    let mut failures = Vec::new();
    for (k, (text, marker, fragments)) in cases.iter().enumerate() {
        let file = dir.join(format!("case{k}.setup.toml"));
        std::fs::write(&file, text).expect("set-up file");
        let script = dir.join("case.rhai");
        std::fs::write(&script, format!("let s = load_setup(\"{}\");\nprint(\"loaded\");", file.display()))
            .expect("script");
        let o = Command::new(env!("CARGO_BIN_EXE_stagna"))
            .args(["run", script.to_str().unwrap_or_default(), "-o", dir.join("out").to_str().unwrap_or_default()])
            .output()
            .expect("the stagna binary runs");
        let stderr = String::from_utf8_lossy(&o.stderr).to_lowercase();
        let stdout = String::from_utf8_lossy(&o.stdout);
        let mut want: Vec<String> = fragments.iter().map(|f| f.to_lowercase()).collect();
        want.push(format!("case{k}.setup.toml"));
        // The line of the marker (its first line when it spans two).
        let first = marker.lines().next().unwrap_or("");
        if !first.is_empty() {
            let n = if marker.contains('\n') {
                text.lines()
                    .collect::<Vec<_>>()
                    .windows(2)
                    .position(|w| w[0].contains(first) && w[1].contains(marker.lines().nth(1).unwrap_or("")))
                    .map(|i| i + 1)
                    .unwrap_or(0)
            } else {
                line_of(text, first)
            };
            want.push(format!("line {n}"));
        }
        if o.status.success() || stdout.contains("loaded") {
            failures.push(format!("case {k}: loaded; expected a refusal"));
        }
        for f in &want {
            if !stderr.contains(f.as_str()) {
                failures.push(format!("case {k}: message lacks {f:?}:\n{stderr}"));
            }
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n"));
    let _ = std::fs::remove_dir_all(&dir);
}
