"""Design: edit or load a design, see whether and how it floats."""

import math

import altair as alt
import pandas as pd
import streamlit as st

from matdb import presentation
from matdb.errors import MatdbError
from matdb.units import parse_length, parse_mass, parse_quantity, parse_temperature
from webapp import _shared as sh

st.title("Design")
design_mod = sh.module_or_none("matdb.design")
lev_mod = sh.module_or_none("matdb.levitate")
design_mod_stab = sh.module_or_none("matdb.design_stabilized")
if design_mod is None or lev_mod is None:
    sh.not_available("The Design page")
    st.stop()

url = sh.db_url()
EXAMPLE = presentation.design_text_from_fields(dict(
    shape="cuboid", size="12.7 mm, 12.7 mm, 12.7 mm", grade="N50", pattern="checkerboard", rows=2, cols=2,
    material="pyrolytic-graphite", plate_shape="rectangle", plate_size="12 mm, 12 mm, 1 mm", payload="0.1 g",
    payload_height="2 mm", min_gap="0.2 mm", temperature="20 degC"))

if "design_text" not in st.session_state:
    st.session_state["design_text"] = EXAMPLE
if "design_source" not in st.session_state:
    st.session_state["design_source"] = "form"

left, right = st.columns([2, 3], gap="large")
text = None
with left:
    source = st.radio("Edit the design with", ["form", "design file"], key="design_source", horizontal=True,
                      format_func=lambda s: {"form": "the form", "design file": "a design file (TOML)"}[s])

    if source == "form":
        mats = sh.materials_table("si-volume", url)
        grades = sh.magnets_df(url)
        dia = list(mats[mats["chi_si"] < 0]["id"])
        c1, c2 = st.columns(2)
        with c1:
            st.markdown("**Magnets**")
            shape = st.selectbox("Magnet shape", ["cuboid", "cylinder", "ring"], key="d_shape")
            size_help = {"cuboid": "x, y, height", "cylinder": "diameter, height",
                         "ring": "outer diameter, inner diameter, height"}[shape]
            size = st.text_input(f"Magnet size ({size_help})", "12.7 mm, 12.7 mm, 12.7 mm", key="d_size")
            for i, part in enumerate(presentation._split_lengths(size)):
                sh.checked(lambda v: parse_length(v, "size", positive=True), part, f"magnet size, value {i + 1}")
            glist = list(grades["grade"])
            grade = st.selectbox("Grade", glist, index=glist.index("N50") if "N50" in glist else 0, key="d_grade")
            pattern = st.selectbox("Arrangement", ["single", "checkerboard", "stripes", "grid"], index=1, key="d_pattern")
            r1, r2 = st.columns(2)
            rows = r1.number_input("Rows (along y)", 1, 40, 2, key="d_rows")
            cols = r2.number_input("Columns (along x)", 1, 40, 2, key="d_cols")
            spacing = st.text_input("Clear gap between magnets", "0 mm", key="d_spacing")
            sh.checked(lambda v: parse_length(v, "spacing"), spacing, "gap between magnets")
            back = st.checkbox("Steel back plate under the magnets", key="d_back")
            cover = st.text_input("Cover sheet thickness", "0 mm", key="d_cover")
            sh.checked(lambda v: parse_length(v, "cover"), cover, "cover sheet")
        with c2:
            st.markdown("**Plate and payload**")
            material = st.selectbox("Plate material", dia, index=dia.index("pyrolytic-graphite")
                                    if "pyrolytic-graphite" in dia else 0, key="d_material")
            pshape = st.selectbox("Plate shape", ["rectangle", "disc"], key="d_pshape")
            psize = st.text_input("Plate size (" + ("x, y, thickness" if pshape == "rectangle" else "diameter, thickness")
                                  + ")", "12 mm, 12 mm, 1 mm" if pshape == "rectangle" else "12 mm, 1 mm", key="d_psize")
            for i, part in enumerate(presentation._split_lengths(psize)):
                sh.checked(lambda v: parse_length(v, "plate size", positive=True), part, f"plate size, value {i + 1}")
            payload = st.text_input("Payload mass", "0.1 g", key="d_payload")
            sh.checked(lambda v: parse_mass(v, "payload"), payload, "payload mass")
            pheight = st.text_input("Payload centre of mass above the plate", "2 mm", key="d_pheight")
            sh.checked(lambda v: parse_length(v, "payload height"), pheight, "payload height")
            min_gap = st.text_input("Required gap", "0.2 mm", key="d_mingap")
            sh.checked(lambda v: parse_length(v, "required gap"), min_gap, "required gap")
            temp = st.text_input("Temperature", "20 degC", key="d_temp")
            sh.checked(lambda v: parse_temperature(v, "temperature"), temp, "temperature")
        text = presentation.design_text_from_fields(dict(
            shape=shape, size=size, grade=grade, pattern=pattern, rows=rows, cols=cols, spacing=spacing,
            back_plate=back, cover=cover, material=material, plate_shape=pshape, plate_size=psize,
            payload=payload, payload_height=pheight, min_gap=min_gap, temperature=temp))
    else:
        up = st.file_uploader("Load a design file", type=["toml"], key="design_upload")
        if up is not None:
            if st.session_state.get("design_upload_name") != (up.name, up.size):
                st.session_state["design_upload_name"] = (up.name, up.size)
                try:
                    st.session_state["design_text"] = up.getvalue().decode("utf-8")
                except UnicodeDecodeError:
                    st.error("design file: not UTF-8 text")
        text = st.text_area("Design (TOML; every quantity with its unit)", key="design_text", height=320)

with left:
    # ---- parse ------------------------------------------------------------------
    try:
        design = design_mod.load_design_text(text)
    except MatdbError as exc:
        st.error(f"design: {exc}")
        st.stop()

    st.download_button("Save this design (TOML)", text.encode(), file_name="design.toml",
                       mime="application/toml", key="design_download")
    with st.expander("Design file text"):
        st.code(text, language="toml")

# ---- results ----------------------------------------------------------------
with right:
    try:
        with st.spinner("Computing the lift curve, stiffnesses and checks..."):
            result = sh.levitate_text(text, None, None, url)
    except MatdbError as exc:
        st.error(f"levitation: {exc}")
        st.stop()

    if result.get("mode") == "stabilized":
        st.subheader("Floating magnet: lifter distance and stability window against payload")
        st.metric("Floats", "yes" if result.get("floats") else "no")
        r1, r2, r3 = st.columns([2, 1, 2])
        prange = r1.text_input("Payload range (e.g. 0 g..5 g; empty: 0 to the largest payload)", "",
                               key="d_payload_range")
        steps = r2.number_input("Steps", 2, 200, 11, key="d_payload_steps")
        shift = r3.text_input("Allowed floater shift for the lifter step (empty: a tenth of its clearance)", "",
                              key="d_resolution")
        payloads, res_m = None, None
        if prange.strip():
            rng = sh.checked(lambda v: design_mod_stab.parse_payload_range(v, "payload range"), prange, "payload range")
            if rng is not None:
                payloads = tuple(float(x) for x in presentation.payload_steps(rng, int(steps)))
        if shift.strip():
            res_m = sh.checked(lambda v: parse_length(v, "shift", positive=True), shift, "allowed floater shift")
        if payloads is not None or res_m is not None:
            try:
                with st.spinner("Computing the schedule over the payload range..."):
                    result = sh.levitate_text(text, None, None, url, payloads, res_m)
            except MatdbError as exc:
                st.error(f"payload range: {exc}")
                st.stop()
        wm = result.get("window_min_m")
        st.caption("Narrowest window of plate distances over the schedule: "
                   + ("none (some payload has no stable plate distance)" if wm is None else f"{wm * 1e3:.3g} mm"))
        sched = presentation.stabilized_window_df(result)
        colour = alt.Color("station:N", title="station")
        base = alt.Chart(sched).encode(x=alt.X("payload_g:Q", title="payload (g)"), color=colour)
        lifter = base.mark_line(point=True).encode(
            y=alt.Y("lifter_distance_mm:Q", title="lifter distance, floater centre to lifter face (mm)",
                    scale=alt.Scale(zero=False)),
            tooltip=["station:N", alt.Tooltip("payload_g:Q", title="payload (g)", format=".3g"),
                     alt.Tooltip("lifter_distance_mm:Q", title="lifter distance (mm)", format=".2f")])
        window = base.mark_area(opacity=0.25).encode(
            y=alt.Y("min_plate_distance_mm:Q", title="stable plate distance, floater centre to plate (mm)",
                    scale=alt.Scale(zero=False)), y2="max_plate_distance_mm:Q",
            tooltip=["station:N", alt.Tooltip("payload_g:Q", title="payload (g)", format=".3g"),
                     alt.Tooltip("min_plate_distance_mm:Q", title="smallest plate distance (mm)", format=".2f"),
                     alt.Tooltip("max_plate_distance_mm:Q", title="largest stable plate distance (mm)", format=".2f")])
        st.altair_chart(alt.vconcat(lifter.properties(height=240, width=420), window.properties(height=240, width=420)),
                        width="content")
        st.caption("Top: where to set the lifter for each payload. Bottom: the band of plate distances that "
                   "keeps the floater stable; it narrows as the payload grows.")
        st.dataframe(sched, hide_index=True, column_config={
            "payload_g": st.column_config.NumberColumn("payload (g)", format="%.3g"),
            "lifter_distance_mm": st.column_config.NumberColumn("lifter distance (mm)", format="%.2f"),
            "max_plate_distance_mm": st.column_config.NumberColumn("largest plate distance (mm)", format="%.2f"),
            "min_plate_distance_mm": st.column_config.NumberColumn("smallest plate distance (mm)", format="%.2f"),
            "lifter_travel_mm": st.column_config.NumberColumn("lifter travel from empty (mm)", format="%.3g"),
            "window_mm": st.column_config.NumberColumn("window (mm)", format="%.3g"),
            "resolution_um": st.column_config.NumberColumn("lifter step (um)", format="%.3g"),
            "drift_um_per_k": st.column_config.NumberColumn("lifter drift (um/K)", format="%.3g"),
            "dforce_dd_n_m": st.column_config.NumberColumn("dF/dd (N/m)", format="%.3g")})
        st.download_button("Schedule as CSV (for a positioning stage)", presentation.schedule_csv(result).encode(),
                           file_name="schedule.csv", mime="text/csv", key="d_schedule_csv")
        stations = presentation.stations_df(result)
        if len(stations):
            st.dataframe(stations, hide_index=True, column_config={
                "x_mm": st.column_config.NumberColumn("x (mm)", format="%.1f"),
                "y_mm": st.column_config.NumberColumn("y (mm)", format="%.1f"),
                "share_pct": st.column_config.NumberColumn("share of the weight (%)", format="%.1f"),
                "lifter_distance_mm": st.column_config.NumberColumn("lifter distance (mm)", format="%.2f")})
        if result.get("safe_distance_m") is not None:
            st.caption(f"Keep implants at least {result['safe_distance_m'] * 1e2:.1f} cm from the magnets (0.5 mT).")
        for w in result.get("warnings", []):
            st.warning(w)
        st.stop()

    c1, c2, c3, c4 = st.columns(4)
    c1.metric("Floats", "yes" if result["floats"] else "no")
    c2.metric("Equilibrium gap", "-" if result["gap_m"] is None else f"{result['gap_m'] * 1e3:.2f} mm")
    c3.metric("Laterally stable", "yes" if result["laterally_stable"] else "no")
    c4.metric("0.5 mT distance", f"{result['safe_distance_m'] * 1e2:.1f} cm")

    st.subheader("Lift against gap")
    curve = presentation.lift_curve_df(result)
    lift = alt.Chart(curve).mark_line(color="#3d6fb6", strokeWidth=2).encode(
        x=alt.X("gap_mm:Q", title="gap above the magnets (mm)"),
        y=alt.Y("force_mn:Q", title="force (mN)"),
        tooltip=[alt.Tooltip("gap_mm:Q", title="gap (mm)", format=".3f"),
                 alt.Tooltip("force_mn:Q", title="lift (mN)", format=".3g")])
    weight = alt.Chart(curve).mark_line(color="#b2182b", strokeDash=[5, 3]).encode(
        x="gap_mm:Q", y="weight_mn:Q", tooltip=[alt.Tooltip("weight_mn:Q", title="weight, plate + payload (mN)", format=".3g")])
    layers = [lift, weight]
    if result["gap_m"] is not None:
        eq = pd.DataFrame({"gap_mm": [result["gap_m"] * 1e3], "force_mn": [result["weight_n"] * 1e3]})
        layers.append(alt.Chart(eq).mark_point(size=140, filled=True, color="#1b7837").encode(
            x="gap_mm:Q", y="force_mn:Q", tooltip=[alt.Tooltip("gap_mm:Q", title="equilibrium gap (mm)", format=".3f")]))
    st.altair_chart(alt.layer(*layers).properties(height=300), width="stretch")
    st.caption("Solid: magnetic lift on the plate; dashed: weight of plate and payload; dot: where they balance "
               "on the falling branch (the equilibrium gap).")

st.subheader("Field over the footprint, and which magnet points up")
m1, m2 = st.columns(2)
default_gap = result["gap_m"] if result["gap_m"] is not None else design.plate.min_gap_m
gap_mm = m1.slider("Height of the map above the magnets (mm)", 0.05, 5.0,
                   float(min(5.0, max(0.05, round(default_gap * 1e3, 2)))), 0.05, key="d_map_gap")
quantity = m2.radio("Show", ["|B| (T)", "B^2 (T^2)"], key="d_map_q", horizontal=True)
extent = (design.plate.size[0], design.plate.size[1] if design.plate.shape == "rectangle" else design.plate.size[0])
with st.spinner("Computing the field map..."):
    fmap = sh.field_map(repr(design.magnets), result["temperature_k"], gap_mm * 1e-3, extent, design)
field = "b_t" if quantity.startswith("|B|") else "b2_t2"
heat = alt.Chart(fmap).mark_rect().encode(
    x=alt.X("x_mm:O", title="x (mm)", axis=alt.Axis(labelExpr="format(datum.value, '.1f')", labelOverlap=True)),
    y=alt.Y("y_mm:O", title="y (mm)", sort="descending", axis=alt.Axis(labelExpr="format(datum.value, '.1f')",
                                                                        labelOverlap=True)),
    color=alt.Color(f"{field}:Q", title=quantity, scale=alt.Scale(scheme="viridis")),
    tooltip=[alt.Tooltip("x_mm:Q", format=".2f", title="x (mm)"), alt.Tooltip("y_mm:Q", format=".2f", title="y (mm)"),
             alt.Tooltip("b_t:Q", format=".3f", title="|B| (T)"), alt.Tooltip("bz_t:Q", format=".3f", title="Bz (T)")],
).properties(height=340, width=340, title=f"{quantity} at {gap_mm:.2f} mm")
pol = presentation.polarity_df(design.arrangement())
boxes = alt.Chart(pol).mark_rect(stroke="black", strokeWidth=1).encode(
    x=alt.X("x0_mm:Q", title="x (mm)"), x2="x1_mm:Q", y=alt.Y("y0_mm:Q", title="y (mm)"), y2="y1_mm:Q",
    color=alt.Color("points:N", title="magnetisation",
                    scale=alt.Scale(domain=["north up", "north down", "sideways"], range=["#d6604d", "#4393c3", "#bbbbbb"])),
    tooltip=["magnet:Q", "points:N", "grade:N", alt.Tooltip("x_mm:Q", format=".2f"), alt.Tooltip("y_mm:Q", format=".2f")])
labels = alt.Chart(pol).mark_text(fontSize=14, fontWeight="bold").encode(x="x_mm:Q", y="y_mm:Q", text="label:N")
st.altair_chart(alt.hconcat(heat, alt.layer(boxes, labels).properties(height=340, width=340,
                                                                     title="top view: N = north pole up")),
                width="content")

st.subheader("Numbers")
n1, n2 = st.columns([3, 2])
with n1:
    summary = presentation.plate_summary(result)
    st.dataframe(summary, hide_index=True, key="design_summary", height=35 * (len(summary) + 1) + 3)
with n2:
    st.markdown("**Bill of materials**")
    with sh.shown_errors("bill of materials"):
        bom = presentation.bill_of_materials(design, url)
        st.dataframe(bom[["item", "size", "grade_or_material", "count", "mass_g", "cost_usd"]], hide_index=True,
                     column_config={
                         "grade_or_material": "grade / material",
                         "mass_g": st.column_config.NumberColumn("mass (g)", format="%.2f"),
                         "cost_usd": st.column_config.NumberColumn("indicative cost (USD, illustrative)", format="%.2f")},
                     key="design_bom")
        total = bom["cost_usd"].sum(min_count=1)
        if not math.isnan(total):
            st.caption(f"Indicative total about {total:.2f} USD. Prices are illustrative, not quotes.")

st.subheader("Warnings and cautions")
warns = result.get("warnings", [])
for w in warns:
    st.warning(w)
if not warns:
    st.success("No warnings.")
from matdb.physics.thermal import SAFETY_TEXT  # noqa: E402

with st.expander("Strong-magnet cautions", expanded=any("Strong magnets" in w for w in warns)):
    st.markdown(SAFETY_TEXT.replace("\n", "  \n"))

# ---- dynamics ---------------------------------------------------------------
dyn_mod = sh.module_or_none("matdb.dynamics")
if dyn_mod is not None and result.get("mode") == "plate":
    st.subheader("Dynamics: modes, damping, Q and noise floor")
    g1, g2 = st.columns([2, 3], gap="large")
    with g1:
        with sh.shown_errors("plate drawing"):
            ring = dyn_mod.outline_df(design)
            ring["path"] = ring["piece"].astype(str) + "-" + ring["ring"].astype(str)
            span = max(ring["x_mm"].max() - ring["x_mm"].min(), ring["y_mm"].max() - ring["y_mm"].min())
            cx, cy = ring["x_mm"].mean(), ring["y_mm"].mean()
            drawing = alt.Chart(ring).mark_line(color="#333333", strokeWidth=1.5).encode(
                x=alt.X("x_mm:Q", title="x (mm)", scale=alt.Scale(domain=[cx - 0.6 * span, cx + 0.6 * span])),
                y=alt.Y("y_mm:Q", title="y (mm)", scale=alt.Scale(domain=[cy - 0.6 * span, cy + 0.6 * span])),
                detail="path:N", order="order:Q")
            st.altair_chart(drawing.properties(width=300, height=300, title="plate outline, slots and holes"),
                            width="content")
            st.caption("Slots and holes cut the eddy-current loops (higher Q in vacuum); set them in "
                       "[plate] as slots = {count, width, length, direction, start} and holes.")
    with g2:
        p_text = st.text_input("Gas pressure (e.g. 1 atm, 1e-3 Pa, 5 mbar)", "1e-3 Pa", key="d_dyn_pressure")
        pressure = sh.checked(lambda v: parse_quantity(v, "Pa", "pressure", positive=True), p_text, "pressure")
        run = st.checkbox("Compute modes, damping and noise (a few seconds)", key="d_dyn_run")
    if run and pressure is not None:
        try:
            with st.spinner("Meshing the plate, solving the eddy currents and the air film..."):
                dres = sh.dynamics_text(text, pressure, url)
                sweep = sh.pressure_sweep(text, url)
        except MatdbError as exc:
            st.error(f"dynamics: {exc}")
        else:
            st.dataframe(dyn_mod.modes_df(dres), hide_index=True, key="design_modes", column_config={
                "frequency_hz": st.column_config.NumberColumn("frequency (Hz)", format="%.3g"),
                "q": st.column_config.NumberColumn("Q", format="%.3g"),
                "q_eddy": st.column_config.NumberColumn("Q eddy", format="%.3g"),
                "q_air": st.column_config.NumberColumn("Q air", format="%.3g"),
                "ring_down_s": st.column_config.NumberColumn("ring-down (s)", format="%.3g"),
                "limited_by": "limited by",
                "noise_ug_rthz": st.column_config.NumberColumn("noise (micro-g/sqrt(Hz))", format="%.3g")})
            st.caption(f"At {pressure:.3g} Pa; conductivity {dres['sigma_in_plane_s_m']:.3g} S/m in the plane, "
                       f"{dres['sigma_across_s_m']:.3g} S/m across ({dres['sigma_source']}). Ring-down: time for "
                       "the amplitude to fall to 1/e. Noise: thermal (Brownian) acceleration noise of the vertical "
                       "and sliding modes. An empty Q means that mechanism does not damp the mode.")
            chart = alt.Chart(sweep.dropna(subset=["q"])).mark_line(point=True).encode(
                x=alt.X("pressure_pa:Q", title="pressure (Pa)", scale=alt.Scale(type="log")),
                y=alt.Y("q:Q", title="Q", scale=alt.Scale(type="log")),
                color=alt.Color("mode:N", title="mode", legend=alt.Legend(orient="bottom", columns=2)),
                tooltip=["mode:N", alt.Tooltip("pressure_pa:Q", title="pressure (Pa)", format=".3g"),
                         alt.Tooltip("q:Q", title="Q", format=".3g"),
                         alt.Tooltip("q_eddy:Q", title="Q eddy", format=".3g"),
                         alt.Tooltip("q_air:Q", title="Q air", format=".3g")])
            st.altair_chart(chart.properties(height=320, title="Q against pressure, each mode"), width="stretch")
            st.caption("At high pressure the air film under the plate limits Q; in vacuum the eddy currents do "
                       "(a flat line), unless the plate does not conduct.")
            for w in dres.get("warnings", []):
                st.warning(w)
