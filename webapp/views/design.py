"""Design: edit or load a design, see whether and how it floats."""

import math

import altair as alt
import pandas as pd
import streamlit as st

from matdb.analysis import dynamics as dyn_mod
from matdb.analysis import magnet_synthesis as synth
from matdb.data import saved_designs as saved
from matdb.design import design_to_toml, load_design_text, parse_payload_range
from matdb.errors import MatdbError
from matdb.physics.thermal import SAFETY_TEXT
from matdb.reporting import charts
from matdb.reporting import presentation, schedule
from matdb.units import parse_length, parse_mass, parse_quantity, parse_temperature
from webapp import _downloads
from webapp import _results as rs
from webapp import _shared as sh

st.title("Design")
url = sh.db_url()
FIELDS = presentation.DESIGN_FORM_DEFAULTS
KEYS = dict(shape="d_shape", size="d_size", grade="d_grade", pattern="d_pattern", rows="d_rows", cols="d_cols",
            spacing="d_spacing", back_plate="d_back", cover="d_cover", material="d_material",
            plate_shape="d_pshape", plate_size="d_psize", payload="d_payload", payload_height="d_pheight",
            min_gap="d_mingap", temp_min="d_temp_min", temp_max="d_temp_max")
EXAMPLE = presentation.design_text_from_fields(FIELDS)

# A design opened from the advisor or from the saved designs arrives as "d_open" (form
# fields, or only a design text the form cannot show); apply it before any widget exists.
opened = st.session_state.pop("d_open", None)
if opened is not None:
    fields, text_in = opened.get("fields"), opened.get("text")
    if fields:
        for k, v in fields.items():
            st.session_state[KEYS[k]] = v
        st.session_state["design_source"] = "form"
    else:
        st.session_state["design_text"] = text_in
        st.session_state["design_source"] = "design file"
    if opened.get("message"):
        st.session_state["d_flash"] = opened["message"]
for k, key in KEYS.items():  # form values survive a visit to another page
    if key not in st.session_state:
        st.session_state[key] = st.session_state.get("d_kept", {}).get(key, FIELDS[k])
if "design_text" not in st.session_state:
    st.session_state["design_text"] = st.session_state.get("d_kept_text", EXAMPLE)
if "design_source" not in st.session_state:
    st.session_state["design_source"] = "form"
flash = st.session_state.pop("d_flash", None)
if flash:
    st.success(sh.plain(flash))

left, right = st.columns([5, 7], gap="large")
text = None
with left:
    source = st.radio("Edit the design with", ["form", "design file"], key="design_source", horizontal=True,
                      format_func=lambda s: {"form": "the form", "design file": "a design file (TOML)"}[s])

    if source == "form":
        mats = sh.materials_table("si-volume", url)
        grades = sh.magnets_df(url)
        dia = list(mats[mats["chi_si"] < 0]["id"])
        glist = list(grades["grade"])
        if st.session_state["d_grade"] not in glist:
            st.session_state["d_grade"] = "N50" if "N50" in glist else glist[0]
        if st.session_state["d_material"] not in dia:
            st.session_state["d_material"] = "pyrolytic-graphite" if "pyrolytic-graphite" in dia else dia[0]
        st.markdown("**Magnets**")
        shape = st.selectbox("Magnet shape", ["cuboid", "cylinder", "ring"], key="d_shape")
        size_help = {"cuboid": "x, y, height", "cylinder": "diameter, height",
                     "ring": "outer diameter, inner diameter, height"}[shape]
        size = st.text_input(f"Magnet size ({size_help})", key="d_size")
        for i, part in enumerate(presentation.split_lengths(size)):
            sh.checked(lambda v: parse_length(v, "size", positive=True), part, f"magnet size, value {i + 1}")
        grade = st.selectbox("Grade", glist, key="d_grade")
        pattern = st.selectbox("Arrangement", list(presentation.FORM_PATTERNS), key="d_pattern")
        r1, r2 = st.columns(2)
        rows = r1.number_input("Rows (along y)", 1, 40, key="d_rows")
        cols = r2.number_input("Columns (along x)", 1, 40, key="d_cols")
        spacing = st.text_input("Clear gap between magnets", key="d_spacing")
        sh.checked(lambda v: parse_length(v, "spacing"), spacing, "gap between magnets")
        back = st.checkbox("Steel back plate under the magnets", key="d_back")
        cover = st.text_input("Cover sheet thickness", key="d_cover")
        sh.checked(lambda v: parse_length(v, "cover"), cover, "cover sheet")
        st.markdown("**Plate and payload**")
        material = st.selectbox("Plate material", dia, key="d_material")
        pshape = st.selectbox("Plate shape", ["rectangle", "disc"], key="d_pshape")
        psize = st.text_input("Plate size (" + ("x, y, thickness" if pshape == "rectangle" else "diameter, thickness")
                              + ")", key="d_psize")
        for i, part in enumerate(presentation.split_lengths(psize)):
            sh.checked(lambda v: parse_length(v, "plate size", positive=True), part, f"plate size, value {i + 1}")
        payload = st.text_input("Payload mass", key="d_payload")
        sh.checked(lambda v: parse_mass(v, "payload"), payload, "payload mass")
        pheight = st.text_input("Payload centre of mass above the plate", key="d_pheight")
        sh.checked(lambda v: parse_length(v, "payload height"), pheight, "payload height")
        min_gap = st.text_input("Required gap", key="d_mingap")
        sh.checked(lambda v: parse_length(v, "required gap"), min_gap, "required gap")
        st.markdown("**Operating temperatures**")
        t1, t2 = st.columns(2)
        temp_min = t1.text_input("Coldest", key="d_temp_min", help="e.g. 0 degC or 273 K")
        temp_max = t2.text_input("Hottest", key="d_temp_max", help="e.g. 60 degC or 333 K")
        tmin_k = sh.checked(lambda v: parse_temperature(v, "temp_min"), temp_min, "coldest temperature")
        tmax_k = sh.checked(lambda v: parse_temperature(v, "temp_max"), temp_max, "hottest temperature")
        if tmin_k is not None and tmax_k is not None and tmin_k > tmax_k:
            st.error("hottest temperature: expected at least the coldest temperature")
        form = dict(shape=shape, size=size, grade=grade, pattern=pattern, rows=rows, cols=cols, spacing=spacing,
                    back_plate=back, cover=cover, material=material, plate_shape=pshape, plate_size=psize,
                    payload=payload, payload_height=pheight, min_gap=min_gap, temp_min=temp_min, temp_max=temp_max)
        st.session_state["d_kept"] = {KEYS[k]: v for k, v in form.items()}
        text = presentation.design_text_from_fields(form)
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
        st.session_state["d_kept_text"] = text


def open_saved(name: str) -> None:
    """Reopen a saved design: in the form when the form can show it, else in the editor."""
    row = saved.get_design(name, url)
    try:
        fields = presentation.form_fields_from_design(load_design_text(row["design_toml"]))
    except MatdbError:
        fields = None
    st.session_state["d_open"] = {"fields": fields, "text": row["design_toml"],
                                  "message": f"Opened the saved design {row['name']!r}."}
    st.rerun()


def saved_designs_panel(design_text: str | None) -> None:
    """Save the design on screen with a name and a note; list, reopen, duplicate, delete."""
    with st.form("d_save_form", clear_on_submit=False, border=False):
        name = st.text_input("Name", key="d_save_name", placeholder="e.g. demo desk toy, 2x2 N50")
        note = st.text_area("Note (optional)", key="d_save_note", height=68)
        overwrite = st.checkbox("Replace a saved design of the same name", key="d_save_overwrite")
        do_save = st.form_submit_button("Save this design", key="d_save", disabled=design_text is None)
    if do_save:
        try:
            row = saved.save_design(name, design_text, note, overwrite=overwrite, url=url)
        except MatdbError as exc:
            st.error(sh.plain(f"not saved: {exc}"))
        else:
            st.session_state["d_flash"] = f"Saved the design as {row['name']!r}."
            st.rerun()
    listed = saved.list_designs(url)
    if listed.empty:
        st.caption("No saved designs yet.")
        return
    show = listed[["name", "note", "updated_at"]].copy()
    show["updated_at"] = [f"{t:%Y-%m-%d %H:%M}" for t in pd.to_datetime(show["updated_at"])]
    st.dataframe(show, hide_index=True, key="d_saved_table", column_config={
        "name": "name", "note": st.column_config.TextColumn("note", width="medium"),
        "updated_at": "last saved (UTC)"})
    names = list(listed["name"])
    pick = st.selectbox("Saved design", names, key="d_saved_pick")
    b1, b2, b3 = st.columns(3)
    if b1.button("Open", key="d_saved_open", type="primary"):
        with sh.shown_errors("open"):
            open_saved(pick)
    if b2.button("Duplicate", key="d_saved_dup"):
        with sh.shown_errors("duplicate"):
            row = saved.duplicate_design(pick, url=url)
            st.session_state["d_flash"] = f"Duplicated {pick!r} as {row['name']!r}."
            st.rerun()
    confirm = st.checkbox(f"Yes, delete {pick!r}", key="d_saved_delete_confirm")
    if b3.button("Delete", key="d_saved_delete", disabled=not confirm):
        with sh.shown_errors("delete"):
            saved.delete_design(pick, url)
            st.session_state["d_flash"] = f"Deleted the saved design {pick!r}."
            st.rerun()


with left:
    # ---- parse ------------------------------------------------------------------
    try:
        design = load_design_text(text)
    except MatdbError as exc:
        st.error(sh.plain(f"design: {exc}"))
        design = None

    if design is not None:
        st.download_button("Download this design (TOML)", text.encode(), file_name="design.toml",
                           mime="application/toml", key="design_download")
        # drawn only when opened (highlighted code is work for the browser on every visit)
        shown_text = st.expander("Design file text", key="d_show_text", on_change="rerun")
        if shown_text.open:
            shown_text.code(text, language="toml")
        # built when opened: widgets nobody asked for are work for the browser on every visit
        report = st.expander("Report and drawing", key="d_report_panel", on_change="rerun")
        if report.open:
            with report:
                _downloads.report_buttons(text, url, "design")
    panel = st.expander("Saved designs: save, open, duplicate, delete", key="d_saved_panel", on_change="rerun")
    if panel.open:
        with panel:
            saved_designs_panel(text if design is not None else None)
    if design is None:
        st.stop()

def compare_section() -> None:
    """Key figures of two to four saved designs side by side, and their lift curves."""
    listed = saved.list_designs(url)
    if len(listed) < 2:
        st.caption("Save two or more designs (panel on the left) to compare them here.")
        return
    names = list(listed["name"])
    chosen = st.multiselect("Saved designs to compare (two to four)", names, key="d_compare", max_selections=4)
    if len(chosen) < 2:
        st.caption("Choose two to four saved designs.")
        return
    with sh.shown_errors("compare"):
        bar = st.progress(0.0, text="Computing the saved designs...")
        done = []

        def evaluate(text: str) -> dict:
            bar.progress(len(done) / len(chosen), text=f"Computing saved design {len(done) + 1} of {len(chosen)}...")
            done.append(text)
            return rs.levitate_text(text)

        ev = saved.evaluate_saved(chosen, url, evaluate=evaluate)
        bar.empty()
        table = saved.compare_table(ev)
        shown = table.copy()
        for name in chosen:
            shown[name] = [presentation.fmt_number(v) for v in table[name]]
        c1, c2 = st.columns([1, 1], gap="large")
        c1.dataframe(shown, hide_index=True, key="d_compare_table",
                     column_config={"figure": st.column_config.TextColumn("key figure (unit)", width="large")})
        c1.download_button("Download the comparison (CSV, exact values)", lambda df=table: sh.csv_bytes(df),
                           file_name="matdb-compare.csv", mime="text/csv", key="d_compare_csv")
        curves = saved.compare_curves(ev)
        if len(curves):
            dash = alt.StrokeDash("design:N", title="design", sort=chosen)
            colour = alt.Color("design:N", title="design", sort=chosen, scale=alt.Scale(scheme="tableau10"))
            lines = alt.Chart(curves).mark_line(strokeWidth=2).encode(
                x=alt.X("gap_mm:Q", title="gap above the magnets (mm)"), y=alt.Y("force_mn:Q", title="lift (mN)"),
                color=colour, strokeDash=dash,
                tooltip=["design:N", alt.Tooltip("gap_mm:Q", title="gap (mm)", format=".3f"),
                         alt.Tooltip("force_mn:Q", title="lift (mN)", format=".3g")])
            weights = alt.Chart(curves).mark_rule(opacity=0.6).encode(
                y="weight_mn:Q", color=colour, strokeDash=dash,
                tooltip=["design:N", alt.Tooltip("weight_mn:Q", title="weight (mN)", format=".3g")])
            c2.altair_chart(alt.layer(lines, weights).properties(
                height=320, title="Lift against gap of the saved designs (lines: lift; rules: weight)"),
                width="stretch")


# ---- results ----------------------------------------------------------------
progress = right.empty()
with right:
    try:
        call = rs.levitate_call(design)
        bar = None if rs.is_ready(call) else progress.progress(
            0.05, text="Computing the lift curve, stiffnesses and checks (step 1 of 2)...")
        how: dict = {}
        result = rs.result_of(call, "Computing the lift curve, stiffnesses and checks (step 1 of 2)...", bar, how)
    except MatdbError as exc:
        progress.empty()
        st.error(sh.plain(f"levitation: {exc}"))
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
            rng = sh.checked(lambda v: parse_payload_range(v, "payload range"), prange, "payload range")
            if rng is not None:
                payloads = tuple(float(x) for x in schedule.payload_steps(rng, int(steps)))
        if shift.strip():
            res_m = sh.checked(lambda v: parse_length(v, "shift", positive=True), shift, "allowed floater shift")
        if payloads is not None or res_m is not None:
            try:
                call = rs.levitate_call(design, None, None, payloads, res_m)
                result = rs.result_of(call, "Computing the schedule over the payload range...")
            except MatdbError as exc:
                st.error(sh.plain(f"payload range: {exc}"))
                st.stop()
        if result.get("max_plate_distance_dipole_m") is not None:
            ratio = result.get("plate_stiffness_dipole_ratio")
            st.caption(
                "Image-dipole idealisation, for comparison only: largest plate distance "
                f"{result['max_plate_distance_dipole_m'] * 1e3:.3g} mm"
                + ("" if result.get("max_plate_distance_m") is None
                   else f" against {result['max_plate_distance_m'] * 1e3:.3g} mm from the finite-size model")
                + ("" if ratio is None else f"; plate stiffness {ratio:.2g} x the finite-size value")
                + ". The verdict and the window use the finite-size model.")
        wm = result.get("window_min_m")
        st.caption("Narrowest window of plate distances over the schedule: "
                   + ("none (some payload has no stable plate distance)" if wm is None else f"{wm * 1e3:.3g} mm"))
        sched = presentation.stabilized_window_df(result)
        sh.chart(("schedule", call.key), lambda: charts.schedule_chart(sched).properties(
            title="Lifter setting and stable plate distances against payload"), width="content")
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
        with st.expander("Suggest designs that float a payload range", expanded=not result.get("floats")):
            s1, s2, s3 = st.columns([2, 1, 2])
            s_range = s1.text_input("Payload range to float", prange.strip() or "0 g..5 g", key="fm_s_range")
            s_win = s2.text_input("Smallest window", "0.5 mm", key="fm_s_window")
            s_mats = s3.multiselect("Plate materials", list(synth.DEFAULT_MATERIALS),
                                    default=list(synth.DEFAULT_MATERIALS), key="fm_s_mats")
            if st.button("Search designs", key="fm_s_go"):
                rng = sh.checked(lambda v: parse_payload_range(v, "payload range"), s_range,
                                 "payload range to float")
                win = sh.checked(lambda v: parse_length(v, "window", positive=True), s_win, "smallest window")
                if rng is not None and win is not None:
                    bar = st.progress(0.0, text="searching lifter, floater, plates and stations")
                    try:
                        res = synth.search(synth.FMRequest(payload_range_kg=rng, min_window_m=win,
                                                           materials=tuple(s_mats) or synth.DEFAULT_MATERIALS),
                                           progress=lambda f, t="": bar.progress(min(max(f, 0.0), 1.0), text=t[:90]))
                        best = next((d for r, d in zip(res.rows, res.designs) if r["feasible"] and d is not None),
                                    None)
                        best_text = None if best is None else design_to_toml(best)
                        st.session_state["fm_search"] = (synth.records(res), res.message, res.notes, best_text)
                    except MatdbError as exc:
                        st.error(sh.plain(f"search: {exc}"))
                    bar.empty()
            found = st.session_state.get("fm_search")
            if found:
                recs, message, notes, best_text = found
                if message:
                    st.warning(sh.plain(message))
                st.dataframe(presentation.floating_designs_df(recs), hide_index=True, key="fm_s_table")
                if best_text:
                    st.download_button("Download the best design (TOML; load it above to check it)", best_text.encode(),
                                       file_name="suggested-floating-magnet.toml", mime="application/toml",
                                       key="fm_s_download")
                for n in notes:
                    st.caption(sh.plain(n))
                st.caption("Suggestions are demo designs, each re-checked by the levitate analysis; "
                           "large magnets need the strong-magnet cautions below.")
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
            st.warning(sh.plain(w))
        progress.empty()
        shown_compare = st.expander("Compare saved designs", key="d_compare_panel", on_change="rerun")
        if shown_compare.open:
            with shown_compare:
                compare_section()
        st.stop()

    # two by two, so each value keeps its unit in full on a narrow screen
    c1, c2 = st.columns(2)
    c1.metric("Floats", "yes" if result["floats"] else "no")
    c2.metric("Equilibrium gap", "none" if result["gap_m"] is None else presentation.fmt_length_mm(result["gap_m"]))
    c3, c4 = st.columns(2)
    c3.metric("Laterally stable", "yes" if result["laterally_stable"] else "no")
    c4.metric("0.5 mT distance", presentation.fmt_number(result["safe_distance_m"] * 1e2, "cm"))
    st.caption(rs.provenance_text(how))

    st.subheader("Lift against gap")
    sh.chart(("lift", call.key), lambda: charts.lift_chart(result).properties(title="Lift and weight against gap"),
             width="stretch")
    st.caption("Solid: magnetic lift on the plate; dashed: weight of plate and payload; dot: where they balance "
               "on the falling branch (the equilibrium gap).")
    st.subheader("Warnings and cautions")
    warns = result.get("warnings", [])
    for w in warns:
        st.warning(sh.plain(w))
    if not warns:
        st.success("No warnings.")
    with st.expander("Strong-magnet cautions", expanded=any("Strong magnets" in w for w in warns)):
        st.markdown(SAFETY_TEXT.replace("\n", "  \n"))
progress.empty()


def field_view() -> None:
    """The field over the footprint (|B| or B^2) and which magnet points up."""
    m1, m2 = st.columns(2)
    default_gap = result["gap_m"] if result["gap_m"] is not None else design.plate.min_gap_m
    gap_mm = m1.slider("Height of the map above the magnets (mm)", 0.05, 5.0,
                       float(min(5.0, max(0.05, round(default_gap * 1e3, 2)))), 0.05, key="d_map_gap")
    quantity = m2.radio("Show", ["|B| (T)", "B^2 (T^2)"], key="d_map_q", horizontal=True)
    extent = (design.plate.size[0], design.plate.size[1] if design.plate.shape == "rectangle" else design.plate.size[0])
    # one under the other, legends below: square maps that fit a 1000 px screen without being cut
    legend = dict(orient="bottom", titleLimit=300)
    sh.chart(("field map", rs.design_key(design), result["temperature_k"], gap_mm, extent, quantity),
             lambda: charts.field_map_chart(
                 rs.field_map(rs.magnets_key(design), result["temperature_k"], gap_mm * 1e-3, extent, design),
                 gap_mm, quantity, charts.plate_outline_df(design)).configure_legend(**legend), width="content",
             canvas=True)
    sh.chart(("polarity", rs.magnets_key(design)),
             lambda: charts.polarity_chart(presentation.polarity_df(design.arrangement())).configure_legend(**legend),
             width="content")


def numbers_view() -> None:
    """The key figures and the bill of materials."""
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
                             "mass_g": st.column_config.NumberColumn("mass (g)", format="%.3g"),
                             "cost_usd": st.column_config.NumberColumn("indicative cost (USD, illustrative)", format="%.2f")},
                         key="design_bom")
            total = bom["cost_usd"].sum(min_count=1)
            if not math.isnan(total):
                st.caption(f"Indicative total about {total:.2f} USD. Prices are illustrative, not quotes.")


def outline_chart(design):
    """The plate's outline with its slots and holes, at 1:1 aspect."""
    ring = dyn_mod.outline_df(design)
    ring["path"] = ring["piece"].astype(str) + "-" + ring["ring"].astype(str)
    span = max(ring["x_mm"].max() - ring["x_mm"].min(), ring["y_mm"].max() - ring["y_mm"].min())
    cx = 0.5 * (ring["x_mm"].max() + ring["x_mm"].min())
    cy = 0.5 * (ring["y_mm"].max() + ring["y_mm"].min())
    return alt.Chart(ring).mark_line(color="#333333", strokeWidth=1.5).encode(
        x=alt.X("x_mm:Q", title="x (mm)", scale=alt.Scale(domain=[cx - 0.6 * span, cx + 0.6 * span])),
        y=alt.Y("y_mm:Q", title="y (mm)", scale=alt.Scale(domain=[cy - 0.6 * span, cy + 0.6 * span])),
        detail="path:N", order="order:Q").properties(width=300, height=300, title="plate outline, slots and holes")


def dynamics_view() -> None:
    """Modes, damping, Q and noise floor of the plate, with its outline (slots and holes)."""
    g1, g2 = st.columns([2, 3], gap="large")
    with g1:
        with sh.shown_errors("plate drawing"):
            sh.chart(("outline", rs.design_key(design)), lambda: outline_chart(design), width="content")
            st.caption("Slots and holes cut the eddy-current loops (higher Q in vacuum); set them in "
                       "[plate] as slots = {count, width, length, direction, start} and holes.")
    with g2:
        p_text = st.text_input("Gas pressure (e.g. 1 atm, 1e-3 Pa, 5 mbar)", "1e-3 Pa", key="d_dyn_pressure")
        pressure = sh.checked(lambda v: parse_quantity(v, "Pa", "pressure", positive=True), p_text, "pressure")
        run = st.checkbox("Compute modes, damping and noise (a few seconds)", key="d_dyn_run")
    if run and pressure is not None:
        dyn_bar = st.progress(0.05, text="Meshing the plate, solving the eddy currents and the air film "
                                         "(step 1 of 2)...")
        try:
            dres = rs.dynamics(design, pressure)
            dyn_bar.progress(0.5, text="Q against pressure for each mode (step 2 of 2)...")
            sweep = rs.pressure_sweep(design)
        except MatdbError as exc:
            dyn_bar.empty()
            st.error(sh.plain(f"dynamics: {exc}"))
        else:
            dyn_bar.empty()
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
                st.warning(sh.plain(w))


VIEWS = ("Numbers and bill of materials", "Field map and polarity", "Dynamics: modes, damping, Q, noise",
         "Compare saved designs")


@st.fragment
def views_section() -> None:
    """One view at a time, built when chosen (a tab not shown costs nothing); choosing one
    reruns only this part of the page."""
    tabs = st.tabs(VIEWS, key="d_view", on_change="rerun")
    for tab, build in zip(tabs, (numbers_view, field_view, dynamics_view, compare_section)):
        if tab.open:
            with tab:
                build()


views_section()
