"""Materials: what each material needs to float, and its cited properties."""

import altair as alt
import pandas as pd
import streamlit as st

from matdb.analysis import reach
from matdb.reporting import presentation
from matdb.errors import MatdbError
from matdb.units import CONVENTIONS
from webapp import _shared as sh

st.title("Materials")
url = sh.db_url()

conv = st.selectbox(
    "Show susceptibility as", CONVENTIONS, key="chi_unit",
    format_func=lambda c: presentation.CHI_UNIT_LABELS[c],
    help="The database stores SI volume susceptibilities; this converts them to the convention your handbook uses.",
)
try:
    mats = sh.materials_table(conv, url)
except MatdbError as exc:
    st.error(sh.plain(f"materials: {exc}"))
    st.stop()

# ---- the levitation view -------------------------------------------------
st.subheader("What each material needs to float freely")
st.caption(
    "A diamagnet floats where the field-gradient product -B dB/dz reaches mu0 rho g / |chi| "
    "(Berry and Geim, Eur. J. Phys. 18, 307 (1997)). Lower is easier. Pyrolytic graphite uses its "
    "value along the c axis, the one a plate lying flat over magnets feels."
)
reach_df, band, reach_msg = None, None, ""
try:
    if sh.arrangement_reach_ready(url):  # from memory: no progress bar
        reach_df = sh.arrangement_reach(url)
    else:
        reach_bar = st.empty()
        reach_bar.progress(0.1, text="Computing the field of common magnet arrangements...")
        reach_df = sh.arrangement_reach(url)
        reach_bar.empty()
    band = reach.reach_band(reach_df)
except MatdbError as exc:
    reach_msg = f"range of common arrangements: {exc}"

need = presentation.levitation_requirements(mats, band)
diam = need[need["required_t2_m"].notna()].copy()
para = need[need["required_t2_m"].isna()]
compare_ids = st.session_state.get("mat_compare", [])
diam["chosen"] = diam["id"].isin(compare_ids)
order = list(diam["name"])
if band is not None:
    VERDICTS, COLOURS = ["plate floats", "small pieces only", "out of reach"], ["#1b7837", "#d98c00", "#8c8c8c"]
else:
    VERDICTS, COLOURS = [""], ["#3d6fb6"]

SHAPES = ["circle", "triangle-up", "cross"] if band is not None else ["circle"]


def requirement_chart():
    """What each diamagnet needs to float, against what common arrangements reach."""
    points = alt.Chart(diam).mark_point(filled=True, opacity=0.9).encode(
        x=alt.X("required_t2_m:Q", scale=alt.Scale(type="log"),
                title="-B dB/dz needed to float (T^2/m, log scale)"),
        y=alt.Y("name:N", sort=order, title=None, axis=alt.Axis(labelLimit=260)),
        color=alt.Color("verdict:N", title="over NdFeB magnets", legend=alt.Legend(labelLimit=200),
                        scale=alt.Scale(domain=VERDICTS, range=COLOURS)),
        shape=alt.Shape("verdict:N", title="over NdFeB magnets", scale=alt.Scale(domain=VERDICTS, range=SHAPES)),
        size=alt.condition("datum.chosen", alt.value(220), alt.value(90)),
        tooltip=[
            alt.Tooltip("name:N", title="material"),
            alt.Tooltip("required_t2_m:Q", title="needs (T^2/m)", format=".3~g"),
            alt.Tooltip("chi_si:Q", title="chi (SI volume)", format=".3e"),
            alt.Tooltip("verdict:N", title="verdict"),
            alt.Tooltip("density_kg_m3:Q", title="density (kg/m^3)", format=",.0f"),
            alt.Tooltip("value_kind:N", title="value kind"),
            alt.Tooltip("source:N", title="source"),
        ],
    )
    layers = []
    if band is not None and reach_df is not None:
        band_df = pd.DataFrame({"low": [band[0]], "high": [band[1]],
                                "label": ["reach of common NdFeB arrangements at 0.2 mm"]})
        layers.append(alt.Chart(band_df).mark_rect(color="#9ecae1", opacity=0.25).encode(
            x="low:Q", x2="high:Q",
            tooltip=[alt.Tooltip("label:N", title=""),
                     alt.Tooltip("low:Q", title="plate average (T^2/m)", format=".3~g"),
                     alt.Tooltip("high:Q", title="local peak (T^2/m)", format=".3~g")]))
        layers.append(alt.Chart(reach_df).mark_rule(color="#3182bd", strokeDash=[3, 3]).encode(
            x="plate_avg_t2_m:Q",
            tooltip=[alt.Tooltip("description:N", title="arrangement"),
                     alt.Tooltip("plate_avg_t2_m:Q", title="1 mm plate average (T^2/m)", format=".3~g"),
                     alt.Tooltip("peak_t2_m:Q", title="local peak (T^2/m)", format=".3~g")]))
    return alt.layer(*layers, points).properties(height=max(260, 22 * len(diam)),
                                                 title="Field-gradient product each diamagnet needs to float")


sh.chart(("materials", sh.frame_key(diam), band, sh.frame_key(reach_df)), requirement_chart, width="stretch")
if band is not None:
    st.caption(
        f"Shaded: what common NdFeB arrangements offer at a 0.2 mm gap, from {band[0]:.3g} T^2/m "
        f"(the best average over a 1 mm plate covering the array: a plate needing less floats) to "
        f"{band[1]:.3g} T^2/m (the strongest local spot near magnet edges: only small pieces there). "
        "Dashed lines: each arrangement's plate average (hover for its name)."
    )
    behind = st.expander("Arrangements behind the shaded range", key="reach_panel", on_change="rerun")
    if behind.open:  # built when opened
        behind.dataframe(
            reach_df[["description", "grade", "br_t", "plate_avg_t2_m", "peak_t2_m"]], hide_index=True,
            column_config={
                "description": "arrangement",
                "br_t": st.column_config.NumberColumn("Br (T)", format="%.3f"),
                "plate_avg_t2_m": st.column_config.NumberColumn("1 mm plate average (T^2/m)", format="%.0f"),
                "peak_t2_m": st.column_config.NumberColumn("local peak (T^2/m)", format="%.0f"),
            }, key="reach_table")
elif reach_msg:
    st.info(sh.plain(reach_msg))
if len(para):
    st.caption(sh.plain("Pulled towards magnets (paramagnetic, cannot float this way): " + ", ".join(para["name"])))

# ---- table ---------------------------------------------------------------
st.subheader("Properties")
c1, c2, c3 = st.columns([2, 1, 2])
text = c1.text_input("Filter by name or id", key="mat_filter", placeholder="e.g. graphite")
dia_only = c2.checkbox("Diamagnets only", key="mat_diamag_only")
kinds = c3.multiselect("Value kind", sorted(mats["value_kind"].unique()), key="mat_kinds")
sort_options = {
    "needed -B dB/dz (easiest first)": ("required_t2_m", True),
    "|chi| / density (largest first)": ("abs_chi_per_density", False),
    "chi (most diamagnetic first)": ("chi_si", True),
    "density (lightest first)": ("density_kg_m3", True),
    "name": ("name", True),
}
sort_by = st.selectbox("Sort by", list(sort_options), key="mat_sort")
shown = presentation.filter_materials(mats, text, dia_only, kinds)
shown = shown.merge(need[["id", "required_t2_m"]], on="id", how="left")
col, asc = sort_options[sort_by]
shown = shown.sort_values(col, ascending=asc, na_position="last").reset_index(drop=True)
unit = presentation.CHI_UNIT_SHORT[conv]
chi_fmt = presentation.CHI_PRINTF
checked = {"chi_shown": "chi_si", "chi_perp_shown": "chi_perp_si", "chi_par_shown": "chi_par_si",
           "density_kg_m3": "density_kg_m3"}
table, order = presentation.add_status_columns(
    shown[["id", "name", "chi_shown", "chi_perp_shown", "chi_par_shown", "density_kg_m3",
           "abs_chi_per_density", "required_t2_m", "value_kind", "source"]],
    sh.status_marks(url)["material"], "id", checked)
# numbers stay numbers (sorting works); the text shown is the page's one format, and an
# empty cell reads as a dash (isotropic materials have no perpendicular/parallel value)
fmt = {c: presentation.fmt_chi for c in ("chi_shown", "chi_perp_shown", "chi_par_shown", "abs_chi_per_density")}
fmt.update({"density_kg_m3": lambda v: presentation.fmt_number(v, sig=4 if abs(v) >= 1000 else 3),
            "required_t2_m": presentation.fmt_number})
styled = table[order].style.format(fmt, na_rep=presentation.MISSING)
st.dataframe(
    styled,
    hide_index=True, key="materials_table",
    column_config={
        **sh.check_column_config(checked),
        "chi_shown": st.column_config.NumberColumn(f"chi ({unit})", format=chi_fmt),
        "chi_perp_shown": st.column_config.NumberColumn(f"chi perp. ({unit})", format=chi_fmt,
                                                        help="field along the c axis (anisotropic plates; "
                                                             "a dash: isotropic)"),
        "chi_par_shown": st.column_config.NumberColumn(f"chi par. ({unit})", format=chi_fmt,
                                                       help="field in the basal plane (a dash: isotropic)"),
        "density_kg_m3": st.column_config.NumberColumn("density (kg/m^3)", format="%.0f"),
        "abs_chi_per_density": st.column_config.NumberColumn("|chi|/density (m^3/kg)", format=chi_fmt),
        "required_t2_m": st.column_config.NumberColumn("needs -B dB/dz (T^2/m)", format="%.3g"),
        "value_kind": "value kind",
    },
)
sh.status_legend()
if conv in ("si-molar", "cgs-molar") and shown["chi_shown"].isna().any():
    st.caption("Empty molar values: the database holds no molar mass for that material (e.g. polymers).")
st.download_button("Download this table (CSV, exact values)", lambda df=shown: sh.csv_bytes(df),
                   file_name="matdb-materials.csv", mime="text/csv", key="mat_download")

# ---- compare -------------------------------------------------------------
st.subheader("Compare")
names = dict(zip(mats["id"].tolist(), mats["name"].tolist()))
picked = st.multiselect("Materials to compare side by side", list(names), key="mat_compare",
                        format_func=lambda i: f"{names[i]} ({i})")
if picked:
    with sh.shown_errors("compare"):
        st.dataframe(presentation.compare_materials(mats.merge(need[["id", "required_t2_m"]], on="id"), picked,
                                                      rounded=True, marks=sh.status_marks(url)["material"]),
                     key="compare_table")

sh.sources_expander(url, "materials_sources")
