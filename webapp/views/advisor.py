"""Advisor: which plate material, grade and arrangement float this payload, ranked."""

import altair as alt
import streamlit as st

from matdb import advisor
from matdb.analysis.levitate import LARGE_MAGNET_M, LARGE_MAGNET_MASS_KG
from matdb.design import load_design_text
from matdb.errors import MatdbError
from matdb.reporting import presentation
from matdb.physics.thermal import SAFETY_TEXT
from matdb.units import parse_length, parse_mass, parse_temperature
from webapp import _downloads
from webapp import _results as rs
from webapp import _shared as sh

# "Open on the Design page" was clicked: go there at once with the candidate prepared on the
# last run (unless the box changed since), without drawing this page again first
_prepared = st.session_state.get("adv_prepared_open")
if st.session_state.get("adv_open") and _prepared and \
        st.session_state.get(_prepared["choice_key"]) == _prepared["choice"]:
    st.session_state["d_open"] = _prepared["open"]
    st.switch_page("views/design.py")

st.title("Advisor")
url = sh.db_url()
mats = sh.materials_table("si-volume", url)
grades = sh.magnets_df(url)

DEFAULTS = rs.ADVISOR_DEFAULTS
MASS_KINDS = ("payload on top of the plate", "total: plate and payload")

st.subheader("Payload")
with st.form("adv_form"):
    c1, c2, c3 = st.columns(3)
    mass = c1.text_input("Mass", DEFAULTS["mass"], key="adv_mass")
    footprint = c2.text_input("Footprint (x by y, e.g. 20 x 20 mm)", DEFAULTS["footprint"], key="adv_footprint")
    min_gap = c3.text_input("Smallest gap needed", DEFAULTS["min_gap"], key="adv_min_gap")
    m1, m2, m3 = st.columns(3)
    mass_kind = m1.radio("The mass is", MASS_KINDS, key="adv_mass_kind", horizontal=False,
                         help="With the total, each plate's side and thickness are matched to it.")
    plate_size = m2.text_input("Plate size (optional, e.g. 15 x 15 mm)", "", key="adv_plate_size",
                               help="Fix the plate outline; empty: the footprint (or sized to the total).")
    envelope = m3.text_input("Magnet envelope (optional, W x L x H)", "", key="adv_envelope",
                             help="The box the magnet array must fit in, e.g. 24 x 24 x 15 mm.")
    c4, c5, c6 = st.columns(3)
    temp_min = c4.text_input("Coldest temperature", DEFAULTS["temp_min"], key="adv_temp_min")
    temp_max = c5.text_input("Hottest temperature", DEFAULTS["temp_max"], key="adv_temp_max")
    budget = c6.text_input("Budget (optional, e.g. 20 USD)", DEFAULTS["budget"], key="adv_budget")
    c7, c8 = st.columns(2)
    materials = c7.multiselect("Only these plate materials (empty: every diamagnet)",
                               list(mats[mats["chi_si"] < 0]["id"]), key="adv_materials")
    families = c8.multiselect("Only these magnet families (empty: all)", sorted(grades["family"].unique()),
                              key="adv_families")
    c9, c10 = st.columns(2)
    top = c9.number_input("Rows to show", 5, 500, DEFAULTS["top"], key="adv_top")
    weights = c10.text_input("Score weights", DEFAULTS["weights"], key="adv_weights",
                             help="How much margin, cost and lift lost to heat count in the score.")
    submitted = st.form_submit_button("Rank candidates", key="adv_submit", type="primary")

# field-by-field checks, each message under the form naming the field
bad = []
for label, value, parse in (("payload mass", mass, lambda v: parse_mass(v, "mass")),
                            ("smallest gap", min_gap, lambda v: parse_length(v, "min_gap")),
                            ("coldest temperature", temp_min, lambda v: parse_temperature(v, "temp_min")),
                            ("hottest temperature", temp_max, lambda v: parse_temperature(v, "temp_max"))):
    if sh.checked(parse, value, label) is None:
        bad.append(label)
for where, value, parse in (("footprint", footprint, lambda v: advisor.parse_footprint(v, "footprint")),
                           ("plate size", plate_size, lambda v: advisor.parse_footprint(v, "plate size")),
                           ("magnet envelope", envelope, lambda v: advisor.parse_envelope(v, "magnet envelope"))):
    if where != "footprint" and not value.strip():
        continue
    with sh.shown_errors(where):
        try:
            parse(value)
        except MatdbError:
            bad.append(where)
            raise

total = mass_kind == MASS_KINDS[1]
params = rs.advisor_params(mass=mass, footprint=footprint, min_gap=min_gap, temp_min=temp_min, temp_max=temp_max,
                           budget=budget, plate_size=plate_size, envelope=envelope, materials=materials,
                           families=families, weights=weights, top=top, total=total)
if bad:
    st.stop()
try:
    request = advisor.parse_request(**{k: v for k, v in params.items() if k != "top"})
except MatdbError as exc:
    st.error(sh.plain(f"payload form: {exc}"))
    st.stop()

key = tuple(sorted(params.items()))
try:
    call = rs.advise_call(key, url)
    ranked = rs.result_of(call, "Ranking every plate material, grade and arrangement:")
except MatdbError as exc:
    st.error(sh.plain(f"advisor: {exc}"))
    st.stop()

if ranked.empty:
    st.warning("No candidates match these restrictions.")
    st.stop()
table = presentation.advisor_table(ranked)
what = f"{mass.strip()} in total (plate and payload)" if total else f"a payload of {mass.strip()}"
st.caption(sh.plain(f"Ranked for {what} over {params['footprint']}, gap at least {params['min_gap']}, "
           f"{params['temp_min']} to {params['temp_max']}"
           + (f", budget {params['budget']}" if params["budget"] else "") + f"; best {int(top)} shown."))
n_ok = int(table["feasible"].sum())
if n_ok == 0:
    st.warning("No candidate floats this payload in the worst case; the reasons are in the table.")
else:
    best = table.iloc[0]
    st.success(sh.plain(f"{n_ok} feasible candidate(s). Best: {presentation.candidate_label(best)}."))

# ---- Pareto chart -------------------------------------------------------------
st.subheader("Cost against worst-case margin")


def pareto_chart(table):
    """Cost against worst-case margin, one point per candidate (click to choose)."""
    plot = table[["rank", "material", "grade", "arrangement", "thickness_mm", "margin", "cost_usd", "feasible",
                  "pareto", "reasons_text"]].dropna(subset=["margin", "cost_usd"])
    pick = alt.selection_point(fields=["rank"], name="pick")
    plot = plot.assign(verdict=presentation.advisor_verdicts(plot))
    points = alt.Chart(plot).mark_point(filled=True, size=90).encode(
        x=alt.X("cost_usd:Q", title="indicative cost (USD, illustrative, log scale)", scale=alt.Scale(type="log")),
        y=alt.Y("margin:Q", title="worst-case margin (lift / weight at the required gap, dimensionless)"),
        color=alt.Color("material:N", title="plate material"),
        shape=alt.Shape("verdict:N", title="verdict", scale=alt.Scale(domain=list(presentation.ADVISOR_VERDICTS),
                                                                      range=["diamond", "circle", "cross"])),
        opacity=alt.condition("datum.feasible", alt.value(0.95), alt.value(0.35)),
        tooltip=[alt.Tooltip("rank:Q"), "material:N", "grade:N", "arrangement:N",
                 alt.Tooltip("thickness_mm:Q", title="plate thickness (mm)", format=".2f"),
                 alt.Tooltip("margin:Q", format=".2f"), alt.Tooltip("cost_usd:Q", title="cost (USD)", format=".2f"),
                 "verdict:N", alt.Tooltip("reasons_text:N", title="reasons")],
    ).add_params(pick)
    rule = alt.Chart(plot.head(1)).mark_rule(color="#b2182b", strokeDash=[4, 3]).encode(y=alt.datum(1.0))
    # each material's best-ranked point carries the material's name: colour is not the only carrier
    names = alt.Chart(plot.drop_duplicates("material")).mark_text(align="left", dx=8, dy=-8, fontSize=11).encode(
        x="cost_usd:Q", y="margin:Q", text="material:N", color=alt.Color("material:N", legend=None))
    return alt.layer(points, rule, names).properties(height=360, title="Indicative cost against worst-case margin")


sig = presentation.ranking_signature(params)
event = sh.chart(("pareto", call.key, int(top)), lambda: pareto_chart(table), width="stretch", on_select="rerun",
                 key=f"adv_chart_{sig}")
st.caption("Diamonds: feasible and on the Pareto front (no other candidate beats them on margin, cost and "
           "derating at once); circles: other feasible candidates; crosses, faded: rejected. Dashed line: "
           "margin 1 (just floats). Each material's best candidate is named beside its point. Click a point to choose it.")

# ---- ranked table -------------------------------------------------------------
st.subheader("Ranking")
st.dataframe(
    table.assign(verdict=presentation.advisor_verdicts(table))[["verdict"] + presentation.ADVISOR_SHOWN],
    hide_index=True, key="adv_table",
    column_config={
        "thickness_mm": st.column_config.NumberColumn("plate thickness (mm)", format="%.3f"),
        "plate_mm": st.column_config.TextColumn("plate (mm)"),
        "plate_g": st.column_config.NumberColumn("plate mass (g)", format="%.4g"),
        "array_mm": st.column_config.TextColumn("array W x L x H (mm)"),
        "magnet_count": st.column_config.NumberColumn("magnets", format="%d"),
        "margin": st.column_config.NumberColumn("margin, worst case (lift / weight)", format="%.2f"),
        "feasible": st.column_config.CheckboxColumn("feasible"),
        "verdict": st.column_config.TextColumn("verdict"),
        "gap_mm": st.column_config.NumberColumn("gap (mm)", format="%.3f"),
        "gap_worst_mm": st.column_config.NumberColumn("gap, worst case (mm)", format="%.3f"),
        "derating_pct": st.column_config.NumberColumn("lift lost hot (%)", format="%.1f"),
        "cost_usd": st.column_config.NumberColumn("cost (USD, illustrative)", format="%.2f"),
        "score": st.column_config.NumberColumn("score", format="%.3f"),
        "reasons_text": st.column_config.TextColumn("reasons", width="large"),
    })
st.download_button("Download the ranking (CSV, exact values)", lambda df=ranked: presentation.ranking_csv(df).encode(),
                   file_name="matdb-ranking.csv", mime="text/csv", key="adv_download_csv")

# ---- choose a candidate ----------------------------------------------------------
st.subheader("Open a candidate")
ranks = [int(r) for r in table["rank"]]
choice_key = f"adv_choice_{sig}"  # a new ranking starts a new box on its first row
try:
    clicked = [int(p["rank"]) for p in event.selection.get("pick", []) if "rank" in p]
except (AttributeError, TypeError, KeyError):
    clicked = []
if clicked and clicked[0] in ranks and st.session_state.get("adv_last_click") != (sig, clicked[0]):
    st.session_state["adv_last_click"] = (sig, clicked[0])
    st.session_state[choice_key] = clicked[0]
labels = {int(r["rank"]): presentation.candidate_label(r) for r in table.to_dict("records")}
choice = st.selectbox("Candidate", ranks, key=choice_key, format_func=lambda r: labels[r])
row = ranked[ranked["rank"] == choice].iloc[0].to_dict()
st.caption(f"{row['material']} plate {presentation.fmt_number(row['thickness_m'] * 1e3, 'mm')} thick over "
           f"{row['arrangement']}, grade {row['grade']}; worst-case margin {presentation.fmt_number(row['margin'])}.")
with sh.shown_errors("candidate design"):
    toml_text = presentation.candidate_toml(row, request)
    rs.prefetch(rs.levitate_call(rs.design_as_the_form_shows(toml_text)))  # "Open" finds it computed
    if row.get("reasons"):
        st.warning(sh.plain("Rejected: " + "; ".join(row["reasons"]) + "."))
    big = max(row["size_m"]) > LARGE_MAGNET_M or (row.get("magnet_mass_kg") or 0) > LARGE_MAGNET_MASS_KG
    if big:
        st.warning(SAFETY_TEXT.replace("\n", "  \n"))
    fields = presentation.form_fields_from_design(load_design_text(toml_text))
    opening = {"fields": fields, "text": toml_text, "message": f"Opened advisor candidate {labels[choice]}."}
    st.session_state["adv_prepared_open"] = {"choice_key": choice_key, "choice": choice, "open": opening}
    d1, d2 = st.columns(2)
    d1.download_button("Download this design (TOML)", toml_text.encode(),
                       file_name=f"design-{row['material']}-{row['grade']}.toml", mime="application/toml",
                       key="adv_download_design")
    if d2.button("Open on the Design page", key="adv_open", type="primary"):
        st.session_state["d_open"] = opening
        st.switch_page("views/design.py")
    report = st.expander("Report and drawing of this candidate", key="adv_report_panel", on_change="rerun")
    if report.open:
        with report:
            _downloads.report_buttons(toml_text, url, "adv", name=f"design-{row['material']}-{row['grade']}")

# ---- sizing optimiser ---------------------------------------------------------------
sizing = st.expander("Size beyond the catalogue (optimiser)", key="opt_panel", on_change="rerun")
if sizing.open:  # built when opened
    with sizing:
        st.caption("Starts from the best feasible candidate above and varies the magnet size, rows and columns, "
                   "spacing, plate side and thickness within the footprint, envelope and budget; every design shown "
                   "is re-checked exactly as the Design page computes it. This takes a while (see the progress bar).")
        objective = st.selectbox("Objective", ("margin", "cost"), key="opt_objective",
                                 format_func=lambda o: {"margin": "largest worst-case margin within the budget",
                                                        "cost": "cheapest design reaching a margin"}[o])
        o2, o3 = st.columns(2)
        min_margin = o2.number_input("Margin to reach (cost objective)", 0.5, 10.0, 1.2, 0.1, key="opt_min_margin")
        run_opt = o3.button("Optimise sizes", key="opt_run", type="primary")
        opt_key = (tuple(sorted(params.items())), objective, float(min_margin) if objective == "cost" else None)
        if run_opt or rs.optimise_done(opt_key, url):
            try:
                result = rs.run_optimise(opt_key, url, label="Sizing:")
            except MatdbError as exc:
                st.error(sh.plain(f"optimiser: {exc}"))
                st.stop()
            if not result.rows:
                st.warning(sh.plain("No sized design passed the exact check. " + " ".join(result.notes)))
            else:
                if result.improvement is not None:
                    word = "margin" if result.objective == "margin" else "cost"
                    st.success(sh.plain(f"Best: {presentation.candidate_label(result.rows[0])}; {word} "
                                        f"{'+' if result.objective == 'margin' else '-'}{abs(result.improvement):.1%} "
                                        "against the best catalogue candidate (re-checked the same way)."))
                for n in result.notes:
                    st.info(sh.plain(n))
                opt_table = presentation.advisor_table(presentation.optimised_frame(result.rows))
                st.dataframe(opt_table[["rank", "source"] + [c for c in presentation.ADVISOR_SHOWN
                                                              if c not in ("rank", "score", "pareto")]],
                             hide_index=True, key="opt_table")
                best_row = result.rows[0]
                if max(best_row["size_m"]) > LARGE_MAGNET_M or (best_row.get("magnet_mass_kg") or 0) > LARGE_MAGNET_MASS_KG:
                    st.warning(SAFETY_TEXT.replace("\n", "  \n"))
                st.download_button("Download the best sized design (TOML)", presentation.optimised_toml(result).encode(),
                                   file_name=f"design-sized-{best_row['material']}-{best_row['grade']}.toml",
                                   mime="application/toml", key="opt_download")
