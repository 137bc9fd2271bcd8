"""Magnets: grades and how their remanence and lift fall with temperature."""

import altair as alt
import streamlit as st

from matdb.reporting import presentation
from matdb.errors import MatdbError
from webapp import _shared as sh

st.title("Magnets")
url = sh.db_url()
try:
    grades = sh.magnets_df(url)
except MatdbError as exc:
    st.error(sh.plain(f"magnet grades: {exc}"))
    st.stop()

all_grades = grades["grade"].tolist()
preferred = [g for g in ("N42", "N42SH", "N52", "N35EH") if g in all_grades]
family_of = dict(zip(grades["grade"].tolist(), grades["family"].tolist()))
smco = [g for g in all_grades if family_of[g] == "SmCo"][:1]
ferrite = [g for g in all_grades if family_of[g] == "ferrite"][:1]
default = (preferred[:3] + smco + ferrite) or all_grades[:3]

# ---- lead chart -----------------------------------------------------------
st.subheader("Remanence and lift against temperature")
c1, c2 = st.columns([3, 2])
chosen = c1.multiselect("Grades", all_grades, default=default, key="mag_grades")
t_lo, t_hi = c2.slider("Temperature range (degC)", min_value=-60, max_value=350, value=(-20, 220), step=5,
                       key="mag_trange")
if not chosen:
    st.info("Choose one or more grades to plot.")
else:
    try:
        curves = sh.grade_curves(url, tuple(chosen), float(t_lo), float(t_hi))
    except MatdbError as exc:
        st.error(sh.plain(f"temperature range: {exc}"))
        curves = None
    if curves is not None:
        marks = presentation.grade_max_temp_marks(curves)
        # colour and marker shape both tell the grades apart (never colour alone)
        palette = presentation.GRADE_PALETTE
        color = alt.Color("grade:N", title="grade", sort=chosen,
                          scale=alt.Scale(domain=chosen, range=[palette[i % len(palette)] for i in range(len(chosen))]))
        shape = alt.Shape("grade:N", title="grade", sort=chosen,
                          scale=alt.Scale(domain=chosen, range=[presentation.GRADE_SHAPES[i % len(presentation.GRADE_SHAPES)]
                                                                for i in range(len(chosen))]))
        tips = [alt.Tooltip("grade:N"), alt.Tooltip("temp_c:Q", title="T (degC)", format=".0f"),
                alt.Tooltip("br_t:Q", title="Br (T)", format=".3f"),
                alt.Tooltip("relative_lift:Q", title="lift vs 20 degC", format=".1%"),
                alt.Tooltip("max_temp_c:Q", title="max working T (degC)", format=".0f")]
        curves = curves.assign(rating=presentation.rating_labels(curves["beyond_max"]))
        dash = alt.StrokeDash("rating:N", title="working temperature",
                              scale=alt.Scale(domain=list(presentation.RATING_LABELS), range=[[1, 0], [4, 3]]))

        def panel(field: str, title: str, fmt: str, heading: str):
            base = alt.Chart(curves).encode(
                x=alt.X("temp_c:Q", title="temperature (degC)"),
                y=alt.Y(f"{field}:Q", title=title, axis=alt.Axis(format=fmt)),
                color=color)
            lines = base.mark_line(strokeWidth=2).encode(strokeDash=dash, detail="rating:N", tooltip=tips)
            step = max(1, len(curves) // max(1, len(chosen)) // 8)
            markers = base.transform_window(i="row_number()", groupby=["grade"]).transform_filter(
                f"(datum.i - 1) % {step} == 0").mark_point(size=60, filled=True).encode(shape=shape, tooltip=tips)
            rules = alt.Chart(marks).mark_rule(strokeDash=[2, 2]).encode(
                x="max_temp_c:Q", color=color,
                tooltip=[alt.Tooltip("grade:N"), alt.Tooltip("max_temp_c:Q", title="max working T (degC)")])
            dots = alt.Chart(marks).mark_point(shape="diamond", size=110, filled=False, strokeWidth=2).encode(
                x="max_temp_c:Q", y=f"{field}:Q", color=color,
                tooltip=[alt.Tooltip("grade:N"), alt.Tooltip("max_temp_c:Q", title="max working T (degC)"),
                         alt.Tooltip(f"{field}:Q", format=fmt)])
            return alt.layer(lines, markers, rules, dots).properties(height=320, width=380, title=heading)

        # two charts in two columns that follow the screen width (a fixed-width pair ran past a 1000 px page)
        legend = dict(orient="bottom", columns=2, labelLimit=160, titleLimit=200)
        p1, p2 = st.columns(2)
        content = (sh.frame_key(curves), sh.frame_key(marks), tuple(chosen))
        sh.chart(("magnets Br",) + content, lambda: panel("br_t", "Br (T)", ".2f", "Remanence against temperature")
                 .properties(width="container").configure_legend(**legend), p1, width="stretch")
        sh.chart(("magnets lift",) + content,
                 lambda: panel("relative_lift", "relative lift (Br/Br at 20 degC)^2, %", ".0%",
                               "Lift over a diamagnet, relative to 20 degC")
                 .properties(width="container").configure_legend(**legend), p2, width="stretch")
        st.caption(
            "Br(T) = Br20 (1 + alpha/100 (T - 20 degC)) from each grade's reversible coefficient; lift over a "
            "diamagnet scales with B^2, so with Br^2. Each grade has its own colour and marker shape. Open "
            "diamonds and dotted rules: each grade's maximum working temperature; dashed line beyond it."
        )
        st.download_button("Download curves (CSV, exact values)", lambda df=curves: sh.csv_bytes(df),
                           file_name="matdb-grade-curves.csv", mime="text/csv", key="curves_download")

# ---- table ----------------------------------------------------------------
st.subheader("Grades")
families = sorted(grades["family"].unique())
fam = st.multiselect("Families", families, key="mag_family")
shown = grades[grades["family"].isin(fam)] if fam else grades
value_cols = ["br_t", "br_min_t", "hcb_ka_m", "hcj_ka_m", "bhmax_kj_m3", "alpha_br_pct_per_k", "beta_hcj_pct_per_k",
              "max_temp_c", "density_kg_m3"]
table = shown[["grade", "family", *value_cols, "price_usd_per_kg", "source"]]
table, order = presentation.add_status_columns(table, sh.status_marks(url)["magnet"], "grade",
                                               {c: c for c in value_cols})
st.dataframe(
    table[order],
    hide_index=True, key="grades_table",
    column_config={
        "br_t": st.column_config.NumberColumn("Br (T)", format="%.3f", help="mid-point of the published range"),
        "br_min_t": st.column_config.NumberColumn("Br min (T)", format="%.3f",
                                                  help="lower end of the published range (guaranteed)"),
        "hcb_ka_m": st.column_config.NumberColumn("Hcb min (kA/m)", format="%.0f"),
        "hcj_ka_m": st.column_config.NumberColumn("Hcj min (kA/m)", format="%.0f"),
        "bhmax_kj_m3": st.column_config.NumberColumn("BHmax (kJ/m^3)", format="%.0f"),
        "alpha_br_pct_per_k": st.column_config.NumberColumn("alpha Br (%/K)", format="%.3f"),
        "beta_hcj_pct_per_k": st.column_config.NumberColumn("beta Hcj (%/K)", format="%.2f"),
        "max_temp_c": st.column_config.NumberColumn("max working T (degC)", format="%.0f"),
        "density_kg_m3": st.column_config.NumberColumn("density (kg/m^3)", format="%.0f"),
        "price_usd_per_kg": st.column_config.NumberColumn("price (USD/kg, illustrative)", format="%.0f"),
        **sh.check_column_config(value_cols),
    },
)
sh.status_legend()
st.caption("Prices are illustrative, not quotes.")
st.download_button("Download grades (CSV, exact values)", lambda df=shown: sh.csv_bytes(df),
                   file_name="matdb-grades.csv", mime="text/csv", key="grades_download")
sh.sources_expander(url, "grades_sources")
