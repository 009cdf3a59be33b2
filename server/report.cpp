#include "server/report.h"

#include <fcntl.h>
#include <signal.h>
#include <spawn.h>
#include <stdlib.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <limits>
#include <nlohmann/json.hpp>
#include <sstream>
#include <thread>

#include "estimation/cautions.h"
#include "estimation/drift.h"
#include "server/api_json.h"
#include "server/dashboard_data.h"
#include "server/iso_time.h"
#include "server/member_json.h"
#include "server/triage.h"
#include "storage/logbook.h"

namespace taut::server {

using nlohmann::json;
using storage::Id;

namespace {

// ------------------------------------------------------------ formatting

std::string Esc(std::string_view s) {
  std::string out;
  for (char c : s) {
    switch (c) {
      case '&':
        out += "&amp;";
        break;
      case '<':
        out += "&lt;";
        break;
      case '>':
        out += "&gt;";
        break;
      case '"':
        out += "&quot;";
        break;
      default:
        out += c;
    }
  }
  return out;
}

std::string F(double v, int digits) {
  if (!std::isfinite(v)) return "&ndash;";
  char buf[64];
  std::snprintf(buf, sizeof buf, "%.*f", digits, v);
  std::string s = buf;
  if (s.rfind("-", 0) == 0) s = "&minus;" + s.substr(1);
  return s;
}
std::string Kn(double n, int digits = 1) { return F(n / 1000.0, digits) + "&nbsp;kN"; }
std::string Day(std::int64_t ms) { return FormatIsoUtc(ms).substr(0, 10); }
std::string When(std::int64_t ms) {
  const std::string t = FormatIsoUtc(ms);
  return t.substr(0, 10) + " " + t.substr(11, 5) + "&nbsp;UTC";
}
std::string When(const json& iso) {
  std::int64_t ms = 0;
  return iso.is_string() && ParseIsoUtc(iso.get<std::string>(), &ms) ? When(ms) : "&ndash;";
}
double Num(const json& v, double fallback = std::numeric_limits<double>::quiet_NaN()) {
  return v.is_number() ? v.get<double>() : fallback;
}

// "a to b kN" of a two-element array of N.
std::string KnRange(const json& ci, int digits = 1) {
  return F(Num(ci[0]) / 1000.0, digits) + " to " + F(Num(ci[1]) / 1000.0, digits) + "&nbsp;kN";
}

// A value with its interval from a stored quantity {"value", "ci95"|"std",
// "fixed"}; `scale` divides, `unit` follows.
std::string Quantity(const json& q, double scale, int digits, const std::string& unit) {
  if (!q.is_object() || !q.contains("value")) return "&ndash;";
  std::string s = F(Num(q["value"]) / scale, digits) + unit;
  if (q.value("fixed", false)) return s + " (held fixed by the description)";
  if (q.contains("ci95") && q["ci95"].is_array() && q["ci95"].size() == 2) {
    s += " (95&nbsp;%: " + F(Num(q["ci95"][0]) / scale, digits) + " to " +
         F(Num(q["ci95"][1]) / scale, digits) + unit + ")";
  } else if (q.contains("std")) {
    s += " (&plusmn;" + F(estimation::kZ975 * Num(q["std"]) / scale, digits) + unit + " at 95&nbsp;%)";
  }
  return s;
}

// ------------------------------------------------------------------ SVG

// Round steps of 1, 2 or 5 times a power of ten, about `count` per range.
double NiceStep(double range, int count) {
  const double raw = range / std::max(1, count);
  const double p = std::pow(10.0, std::floor(std::log10(raw)));
  for (double m : {1.0, 2.0, 5.0, 10.0}) {
    if (m * p >= raw) return m * p;
  }
  return 10 * p;
}

struct Frame {
  double w = 680, h = 150, left = 56, right = 14, top = 12, bottom = 28;
  double x0 = 0, x1 = 1, y0 = 0, y1 = 1;
  double X(double x) const { return left + (x - x0) / (x1 - x0) * (w - left - right); }
  double Y(double y) const { return h - bottom - (y - y0) / (y1 - y0) * (h - top - bottom); }
};

std::string P(double v) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "%.1f", v);
  return buf;
}

// Axes with ticks: y ticks labelled by `ylabel(y)`, x ticks by `xlabel(x)`.
template <typename XLabel>
std::string Axes(const Frame& f, double xstep, XLabel xlabel, double ystep, const std::string& yunit,
                 int ydigits) {
  std::ostringstream o;
  o << "<g class=\"axes\">";
  for (double y = std::ceil(f.y0 / ystep) * ystep; y <= f.y1 + 1e-9 * ystep; y += ystep) {
    o << "<path class=\"grid\" d=\"M" << P(f.left) << "," << P(f.Y(y)) << "H" << P(f.w - f.right) << "\"/>"
      << "<text x=\"" << P(f.left - 5) << "\" y=\"" << P(f.Y(y) + 3) << "\" text-anchor=\"end\">"
      << F(y, ydigits) << "</text>";
  }
  for (double x = std::ceil(f.x0 / xstep) * xstep; x <= f.x1 + 1e-9 * xstep; x += xstep) {
    o << "<path class=\"tick\" d=\"M" << P(f.X(x)) << "," << P(f.h - f.bottom) << "v4\"/><text x=\""
      << P(f.X(x)) << "\" y=\"" << P(f.h - f.bottom + 15) << "\" text-anchor=\"middle\">" << xlabel(x)
      << "</text>";
  }
  o << "<path class=\"frame\" d=\"M" << P(f.left) << "," << P(f.top) << "V" << P(f.h - f.bottom) << "H"
    << P(f.w - f.right) << "\"/><text class=\"unit\" x=\"" << P(f.left - 5) << "\" y=\"" << P(f.top - 2)
    << "\" text-anchor=\"end\">" << yunit << "</text></g>";
  return o.str();
}

struct TimePoint {
  double t_ms, y, lo, hi;
};
struct Mark {
  double t_ms;
  std::string label, title;
};

// Force history: the 95 % band, the estimates, horizontal reference lines
// and logbook marks, in kN against UTC dates.
std::string ForceChart(const std::vector<TimePoint>& pts,
                       const std::vector<std::pair<double, std::string>>& lines,
                       const std::vector<Mark>& marks, std::int64_t from, std::int64_t to) {
  Frame f;
  f.x0 = static_cast<double>(from);
  f.x1 = static_cast<double>(to);
  double lo = std::numeric_limits<double>::infinity(), hi = -lo;
  for (const auto& p : pts) {
    lo = std::min(lo, p.lo);
    hi = std::max(hi, p.hi);
  }
  for (const auto& l : lines) {
    lo = std::min(lo, l.first);
    hi = std::max(hi, l.first);
  }
  if (!std::isfinite(lo)) lo = 0, hi = 1;
  const double pad = std::max(0.05 * (hi - lo), 0.5);
  const double ystep = NiceStep(hi - lo + 2 * pad, 5);
  f.y0 = std::floor((lo - pad) / ystep) * ystep;
  f.y1 = std::ceil((hi + pad) / ystep) * ystep;
  const double day = 86'400'000.0;
  const double xstep = std::max(1.0, NiceStep((f.x1 - f.x0) / day, 6)) * day;
  std::ostringstream o;
  o << "<svg class=\"chart\" viewBox=\"0 0 " << f.w << " " << f.h << "\" role=\"img\"><title>Axial force, "
    << pts.size() << " estimates with their 95 % intervals</title>";
  o << Axes(
      f, xstep, [](double x) { return Day(static_cast<std::int64_t>(x)).substr(5); }, ystep, "kN",
      ystep < 1 ? 1 : 0);
  if (!pts.empty()) {  // the band: upper edge forward, lower edge back
    o << "<path class=\"band\" d=\"";
    for (std::size_t i = 0; i < pts.size(); ++i)
      o << (i ? "L" : "M") << P(f.X(pts[i].t_ms)) << "," << P(f.Y(pts[i].hi));
    for (std::size_t i = pts.size(); i-- > 0;) o << "L" << P(f.X(pts[i].t_ms)) << "," << P(f.Y(pts[i].lo));
    o << "Z\"/>";
    for (const auto& p : pts) {
      o << "<path class=\"whisker\" d=\"M" << P(f.X(p.t_ms)) << "," << P(f.Y(p.lo)) << "V" << P(f.Y(p.hi))
        << "\"/>";
    }
    o << "<path class=\"line\" d=\"";
    for (std::size_t i = 0; i < pts.size(); ++i)
      o << (i ? "L" : "M") << P(f.X(pts[i].t_ms)) << "," << P(f.Y(pts[i].y));
    o << "\"/>";
    for (const auto& p : pts)
      o << "<circle class=\"pt\" cx=\"" << P(f.X(p.t_ms)) << "\" cy=\"" << P(f.Y(p.y)) << "\" r=\"2.2\"/>";
  }
  for (const auto& [y, label] : lines) {
    o << "<path class=\"ref\" d=\"M" << P(f.left) << "," << P(f.Y(y)) << "H" << P(f.w - f.right)
      << "\"/><text class=\"ref-label\" x=\"" << P(f.w - f.right - 4) << "\" y=\"" << P(f.Y(y) - 3)
      << "\" text-anchor=\"end\">" << label << "</text>";
  }
  for (const auto& m : marks) {
    if (m.t_ms < f.x0 || m.t_ms > f.x1) continue;
    o << "<g class=\"mark\"><title>" << Esc(m.title) << "</title><path d=\"M" << P(f.X(m.t_ms)) << ","
      << P(f.top) << "V" << P(f.h - f.bottom) << "\"/><rect x=\"" << P(f.X(m.t_ms) - 4) << "\" y=\""
      << P(f.top) << "\" width=\"8\" height=\"8\"/><text x=\"" << P(f.X(m.t_ms) + 6) << "\" y=\""
      << P(f.top + 8) << "\">" << Esc(m.label) << "</text></g>";
  }
  o << "</svg>";
  return o.str();
}

// The first singular value of the record's spectral matrix (log scale) with
// the identified peaks numbered by mode order.
std::string SpectrumChart(const json& sp) {
  const json& fx = sp["frequency_hz"];
  const json& s1 = sp["s1"];
  Frame f;
  f.w = 400;
  f.h = 180;
  f.left = 40;
  f.x0 = 0;
  f.x1 = Num(sp["band_hz"][1], 1.0);
  double lo = std::numeric_limits<double>::infinity(), hi = -lo;
  for (std::size_t i = 0; i < s1.size(); ++i) {
    if (!s1[i].is_number() || s1[i].get<double>() <= 0 || Num(fx[i]) > f.x1) continue;
    lo = std::min(lo, std::log10(s1[i].get<double>()));
    hi = std::max(hi, std::log10(s1[i].get<double>()));
  }
  if (!std::isfinite(lo)) lo = -1, hi = 0;
  f.y0 = std::floor(lo);
  f.y1 = std::ceil(hi) + 0.5;
  std::ostringstream o;
  o << "<svg class=\"chart\" viewBox=\"0 0 " << f.w << " " << f.h
    << "\" role=\"img\"><title>Spectrum of the latest record with the identified peaks</title>";
  const double xstep = NiceStep(f.x1 - f.x0, 8);
  o << Axes(
      f, xstep, [](double x) { return F(x, x < 10 && x != std::floor(x) ? 1 : 0); }, 1.0,
      "log<tspan>10</tspan> s1", 0);
  o << "<text class=\"unit\" x=\"" << P(f.w - f.right) << "\" y=\"" << P(f.h - 2)
    << "\" text-anchor=\"end\">Hz</text>";
  o << "<path class=\"line\" d=\"";
  bool first = true;
  for (std::size_t i = 0; i < s1.size(); ++i) {
    if (!s1[i].is_number() || s1[i].get<double>() <= 0 || Num(fx[i]) > f.x1) continue;
    o << (first ? "M" : "L") << P(f.X(Num(fx[i]))) << "," << P(f.Y(std::log10(s1[i].get<double>())));
    first = false;
  }
  o << "\"/>";
  for (const json& p : sp["peaks"]) {
    if (!p["s1"].is_number() || p["s1"].get<double>() <= 0) continue;
    const double x = f.X(Num(p["frequency_hz"])), y = f.Y(std::log10(p["s1"].get<double>()));
    o << "<path class=\"peak\" d=\"M" << P(x) << "," << P(y - 4)
      << "l-4,-7h8z\"/><text class=\"peak-label\" x=\"" << P(x) << "\" y=\"" << P(y - 14)
      << "\" text-anchor=\"middle\">"
      << (p["order"].is_number() ? std::to_string(p["order"].get<int>()) : std::string("u")) << "</text>";
  }
  o << "</svg>";
  return o.str();
}

// --------------------------------------------------------------- content

const char* kCss = R"css(
@page { size: A4; margin: 12mm 13mm 13mm 13mm; }
* { box-sizing: border-box; }
body { font: 9pt/1.3 "DejaVu Serif", Georgia, serif; color: #1d232a; margin: 0; }
h1, h2, h3, .label, th, .kf dt { font-family: "DejaVu Sans", "Helvetica Neue", Arial, sans-serif; }
h1 { font-size: 22pt; margin: 0 0 4mm; letter-spacing: -0.01em; }
h2 { font-size: 13pt; margin: 0 0 3mm; border-bottom: 1.5pt solid #2f5d73; padding-bottom: 1mm; }
h3 { font-size: 8.5pt; margin: 2mm 0 0.8mm; text-transform: uppercase; letter-spacing: 0.06em; color: #2f5d73; }
.cover { height: 265mm; display: flex; flex-direction: column; border-left: 5mm solid #2f5d73; padding-left: 8mm; }
.cover .kind { font: 600 10pt "DejaVu Sans", sans-serif; letter-spacing: 0.2em; text-transform: uppercase; color: #2f5d73; margin-top: 30mm; }
.cover .desc { font-size: 12pt; margin: 0 0 10mm; }
.cover dl { display: grid; grid-template-columns: 38mm 1fr; gap: 2mm 4mm; font-size: 10.5pt; }
.cover dt { font: 600 9pt "DejaVu Sans", sans-serif; text-transform: uppercase; letter-spacing: 0.05em; color: #555; }
.cover .fill { border-bottom: 0.6pt solid #1d232a; min-width: 70mm; display: inline-block; }
.notice { border: 1pt solid #1d232a; padding: 3mm 4mm; margin-top: auto; font-size: 9.5pt; }
.notice b { font-family: "DejaVu Sans", sans-serif; }
.sheet { page-break-before: always; break-before: page; }
.sheet-head { display: flex; justify-content: space-between; align-items: baseline; border-bottom: 1.5pt solid #2f5d73; margin-bottom: 2mm; }
.sheet-head h2 { border: 0; margin: 0; padding: 0; }
.sheet-head .where { font: 8.5pt "DejaVu Sans", sans-serif; color: #555; }
table { border-collapse: collapse; width: 100%; font-size: 8pt; margin: 0.5mm 0 1.5mm; }
th { text-align: left; font-size: 7.5pt; text-transform: uppercase; letter-spacing: 0.04em; border-bottom: 0.8pt solid #1d232a; padding: 1mm 1.5mm; }
td { border-bottom: 0.4pt solid #c9c4b6; padding: 0.5mm 1.5mm; vertical-align: top; }
td.n { text-align: right; white-space: nowrap; font-variant-numeric: tabular-nums; }
.kf { display: grid; grid-template-columns: repeat(4, 1fr); gap: 0 4mm; margin: 0 0 2mm; }
.kf div { border-left: 1.2pt solid #2f5d73; padding-left: 2mm; }
.kf dt { font-size: 7pt; text-transform: uppercase; letter-spacing: 0.05em; color: #555; }
.kf dd { margin: 0; font-size: 9.5pt; }
.two { display: grid; grid-template-columns: 1fr 1fr; gap: 4mm; }
table.q td:first-child { width: 38%; }
svg.chart { width: 100%; height: auto; display: block; font: 7pt "DejaVu Sans", sans-serif; }
svg .grid { stroke: #e1dccf; stroke-width: 0.6; }
svg .frame, svg .tick { stroke: #1d232a; stroke-width: 0.8; fill: none; }
svg .band { fill: #e3d7bf; stroke: none; }
svg .whisker { stroke: #9c8a68; stroke-width: 0.8; }
svg .line { fill: none; stroke: #1d232a; stroke-width: 1.1; }
svg .pt { fill: #1d232a; }
svg .ref { stroke: #8a1f14; stroke-width: 0.9; stroke-dasharray: 6 3; }
svg .ref-label { fill: #8a1f14; font-weight: 600; }
svg .mark path { stroke: #2f5d73; stroke-dasharray: 3 2; }
svg .mark rect { fill: #fff; stroke: #2f5d73; stroke-width: 1.2; }
svg .mark text, svg .peak-label { font-weight: 600; fill: #2f5d73; }
svg .peak { fill: #2f5d73; }
svg .unit { fill: #555; }
.sev { font: 600 7pt "DejaVu Sans", sans-serif; text-transform: uppercase; letter-spacing: 0.04em; padding: 0 1mm; border: 0.6pt solid #1d232a; white-space: nowrap; }
.sev-unusable, .tier-alert { background: #1d232a; color: #fff; }
.sev-reduced-confidence, .tier-watch { border-style: dashed; }
.muted { color: #666; }
.method p { margin: 0 0 2mm; text-align: justify; hyphens: auto; }
.refs li { margin-bottom: 1mm; }
.signature { display: grid; grid-template-columns: 1fr 1fr; gap: 8mm; margin-top: 10mm; }
.signature div { border-top: 0.8pt solid #1d232a; padding-top: 1mm; font: 8pt "DejaVu Sans", sans-serif; color: #555; min-height: 18mm; }
.foot { font: 7.5pt "DejaVu Sans", sans-serif; color: #666; margin-top: 2mm; }
)css";

const char* kMethod = R"html(
<p>Each record holds the vibration of the member measured by accelerometers while it is in service. The
record is cut into overlapping segments and their cross-spectra are averaged (Welch 1967); the natural
frequencies and mode shapes are identified by stochastic subspace identification of the covariances
(Peeters and De Roeck 1999) and checked on the first singular value of the spectral matrix (Brincker,
Zhang and Andersen 2001). A beam model of the member, with its measured geometry and material and with
the axial force, the bending stiffness and a rotational fixity at each end as unknowns, is fitted to the
identified frequencies and shapes (shape agreement by the modal assurance criterion, Allemang 2003; end
restraint by the fixity factor of Monforton and Wu 1963). The model includes the stiffening of the axis
under large amplitude (Woinowsky-Krieger 1950) and, for sagging members, the cable effect (Irvine and
Caughey 1974). The fit gives each quantity with a 95&nbsp;% interval from the scatter of the identified
frequencies; published practice for tie-rods (Tullini and Laudiero 2008; Lagomarsino and Calderini 2005)
is the reference the method is measured against.</p>
<p>Every estimate carries cautions that say what limits it (severity <i>info</i>, <i>reduced confidence</i>
or <i>unusable</i>); an estimate judged unusable is shown but enters no baseline and raises no alert.
The force of each member is compared with a baseline of its own first estimates after removing the effect
of temperature by a straight-line regression (Montgomery, Peck and Vining 2012); sustained departures and
slow drifts (cumulative sum, Page 1954) raise alerts. The absolute rules compare the whole 95&nbsp;% interval
with a limit: an <i>alert</i> when the interval lies beyond it, a <i>watch</i> when the interval straddles it.
A logbook entry such as a re-tensioning can start a new baseline. The force ratio is the force divided by the
design force of the member; for a tie a low ratio is the danger.</p>
)html";

const char* kReferences = R"html(
<ol class="refs">
<li>P. D. Welch, The use of FFT for the estimation of power spectra, IEEE Trans. Audio Electroacoust. 15 (1967).</li>
<li>B. Peeters, G. De Roeck, Reference-based stochastic subspace identification for output-only modal analysis, Mech. Syst. Signal Process. 13 (1999).</li>
<li>R. Brincker, L. Zhang, P. Andersen, Modal identification of output-only systems using frequency domain decomposition, Smart Mater. Struct. 10 (2001).</li>
<li>R. J. Allemang, The modal assurance criterion: twenty years of use and abuse, Sound and Vibration (2003).</li>
<li>G. R. Monforton, T. S. Wu, Matrix analysis of semi-rigidly connected frames, J. Struct. Div. ASCE 89 (1963).</li>
<li>S. Woinowsky-Krieger, The effect of an axial force on the vibration of hinged bars, J. Appl. Mech. 17 (1950).</li>
<li>H. M. Irvine, T. K. Caughey, The linear theory of free vibrations of a suspended cable, Proc. R. Soc. Lond. A 341 (1974).</li>
<li>N. Tullini, F. Laudiero, Dynamic identification of beam axial loads using one flexural mode shape, J. Sound Vib. 318 (2008).</li>
<li>S. Lagomarsino, C. Calderini, The dynamical identification of the tensile force in ancient tie-rods, Eng. Struct. 27 (2005).</li>
<li>D. C. Montgomery, E. A. Peck, G. G. Vining, Introduction to Linear Regression Analysis, 5th ed. (2012).</li>
<li>E. S. Page, Continuous inspection schemes, Biometrika 41 (1954).</li>
<li>R. D. Blevins, Formulas for Natural Frequency and Mode Shape (1979); S. P. Timoshenko, J. M. Gere, Theory of Elastic Stability (1961).</li>
</ol>
)html";

std::string Severity(const json& c) {
  const std::string s = c.value("severity", std::string());
  if (s.empty()) return "<span class=\"sev\">&ndash;</span>";
  return "<span class=\"sev sev-" + Esc(s) + "\">" + Esc(s) + "</span>";
}

std::string PortfolioTable(const std::vector<json>& rows) {
  std::ostringstream o;
  o << "<table><thead><tr><th>Member</th><th>Latest force</th><th>95&nbsp;% interval</th><th>Force ratio "
       "N/N<sub>d</sub> (95&nbsp;%)</th><th>30-day change (95&nbsp;%)</th><th>Open alerts</th><th>Last "
       "record</th></tr></thead><tbody>";
  for (const json& r : rows) {
    const json& l = r["latest"];
    const json& fr = r["force_ratio"];
    const json& ch = r["change_30d"];
    o << "<tr><td>" << Esc(r["external_id"].get<std::string>()) << "</td>";
    if (l.is_object()) {
      o << "<td class=\"n\">" << Kn(Num(l["axial_force_n"])) << "</td><td class=\"n\">"
        << KnRange(l["ci95_n"]) << "</td>";
    } else {
      o << "<td class=\"muted\" colspan=\"2\">no estimate</td>";
    }
    o << "<td class=\"n\">"
      << (fr.is_object() ? F(Num(fr["value"]), 2) + " (" + F(Num(fr["ci95"][0]), 2) + " to " +
                               F(Num(fr["ci95"][1]), 2) + ")"
                         : "&ndash;")
      << "</td><td class=\"n\">"
      << (ch.is_object() ? Kn(Num(ch["value_n"])) + " (" + KnRange(ch["ci95_n"]) + ")" : "&ndash;")
      << "</td>";
    const json& t = r["open_alerts_by_tier"];
    o << "<td>" << t["alert"].get<int>() << " alert, " << t["watch"].get<int>() << " watch</td><td>"
      << When(r["last_record_at"]) << "</td></tr>";
  }
  o << "</tbody></table>";
  return o.str();
}

Status Fail(const std::string& what, const storage::StorageStatus& s) {
  return Status::InvalidArgument(what + ": " + s.message);
}

// One member's sheet.
Status MemberSheet(storage::Repository& repo, Id org, const storage::Structure& st, const storage::Member& m,
                   const json& row, const ReportOptions& o, std::ostringstream& out) {
  const std::string id = Esc(m.external_id);
  model::Member member;
  const bool described = ParseMember(m.description_json, &member, MemberReadOptions{.require_id = true}).ok();
  std::vector<storage::Estimate> history;
  if (auto s = repo.ForceHistory(org, m.id, o.from_unix_ms, o.to_unix_ms, &history); !s.ok()) {
    return Fail("history of member " + m.external_id, s);
  }
  storage::Logbook logbook(repo.database());
  std::vector<storage::LogEntry> entries;
  if (auto s = logbook.List(org, m.id, std::numeric_limits<std::int64_t>::min(), o.to_unix_ms, &entries);
      !s.ok()) {
    return Fail("logbook of member " + m.external_id, s);
  }
  std::vector<storage::Alert> alerts;
  if (auto s = repo.ListAlerts(org, {m.id, std::nullopt}, &alerts); !s.ok()) {
    return Fail("alerts of member " + m.external_id, s);
  }
  out << "<section class=\"sheet\" id=\"member-" << m.id << "\"><div class=\"sheet-head\"><h2>Member " << id
      << "</h2><span class=\"where\">" << Esc(st.name) << " &middot; member sheet &middot; "
      << Day(o.from_unix_ms) << " to " << Day(o.to_unix_ms) << "</span></div>";
  // Key figures (the latest estimate of all time, as the portfolio).
  const json& l = row["latest"];
  const json& fr = row["force_ratio"];
  const json& ch = row["change_30d"];
  out << "<dl class=\"kf\"><div><dt>Latest force</dt><dd>";
  if (l.is_object()) {
    out << "<b>" << Kn(Num(l["axial_force_n"])) << "</b> (95&nbsp;% interval " << KnRange(l["ci95_n"]) << ")";
  } else {
    out << "no estimate";
  }
  out << "</dd></div><div><dt>Force ratio N/N<sub>d</sub></dt><dd>"
      << (fr.is_object() ? F(Num(fr["value"]), 2) + " (" + F(Num(fr["ci95"][0]), 2) + " to " +
                               F(Num(fr["ci95"][1]), 2) + ") of " + Kn(Num(row["design_axial_force_n"]))
                         : "&ndash;")
      << "</dd></div><div><dt>30-day change</dt><dd>"
      << (ch.is_object() ? Kn(Num(ch["value_n"])) + " (" + KnRange(ch["ci95_n"]) + ")" : "&ndash;")
      << "</dd></div><div><dt>Latest measured</dt><dd>"
      << (l.is_object() ? When(l["measured_at"]) : "&ndash;") << "</dd></div></dl>";
  // Force history in the period.
  std::vector<TimePoint> pts;
  for (const auto& e : history) {
    pts.push_back({static_cast<double>(e.measured_at_unix_ms), e.axial_force_n / 1000.0,
                   e.force_ci95_low_n / 1000.0, e.force_ci95_high_n / 1000.0});
  }
  std::vector<std::pair<double, std::string>> lines;
  if (described && member.design_axial_force_n) {
    lines.push_back({*member.design_axial_force_n / 1000.0, "design"});
    lines.push_back({0.5 * *member.design_axial_force_n / 1000.0, "50 % of design"});
  }
  std::vector<Mark> marks;
  for (std::size_t i = 0; i < entries.size(); ++i) {
    marks.push_back({static_cast<double>(entries[i].occurred_at_unix_ms), "L" + std::to_string(i + 1),
                     entries[i].kind + ": " + entries[i].note});
  }
  out << "<h3>Axial force in the period (" << history.size()
      << " estimates; band: 95&nbsp;% intervals; squares: logbook)</h3>"
      << ForceChart(pts, lines, marks, o.from_unix_ms, o.to_unix_ms);
  // The latest estimate's evidence.
  storage::Estimate latest;
  const auto ls = repo.LatestEstimate(org, m.id, &latest);
  if (!ls.ok() && !ls.not_found()) return Fail("latest estimate of member " + m.external_id, ls);
  if (ls.ok()) {
    const json result = StoredJson(latest.result_json);
    const json fix = result.value("end_fixity", json::object());
    out << "<div class=\"two\"><div><h3>Stiffness and end restraint (latest estimate)</h3><table "
           "class=\"q\"><tbody>"
        << "<tr><td>Bending stiffness EI</td><td class=\"n\">"
        << Quantity(result.value("bending_stiffness_nm2", json()), 1000.0, 2, "&nbsp;kN&middot;m&sup2;")
        << "</td></tr>";
    if (described) {
      out << "<tr><td>Nominal EI (description)</td><td class=\"n\">"
          << F(member.NominalBendingStiffness_nm2(member.MajorityPlane()) / 1000.0, 2)
          << "&nbsp;kN&middot;m&sup2;</td></tr>";
    }
    const json& cc = row["critical_compression"];
    if (cc.is_object()) {
      out << "<tr><td>Critical compression (Euler, with the end restraint)</td><td class=\"n\">"
          << Kn(Num(cc["value_n"])) << " (95&nbsp;%: " << KnRange(cc["ci95_n"]) << ")</td></tr>";
    }
    out << "<tr><td>Fixity, left end (0 pinned, 1 clamped)</td><td class=\"n\">"
        << Quantity(fix.value("left", json()), 1.0, 2, "")
        << "</td></tr><tr><td>Fixity, right end</td><td class=\"n\">"
        << Quantity(fix.value("right", json()), 1.0, 2, "") << "</td></tr></tbody></table>";
    out << "</div><div><h3>Measured and model frequencies</h3><table><thead><tr><th>Mode</th>"
           "<th>Measured</th><th>Model</th><th>MAC</th></tr></thead><tbody>";
    for (const json& md : result.value("modes", json::array())) {
      out << "<tr><td>" << (md.contains("order") ? md["order"].dump() : "&ndash;") << "</td><td class=\"n\">"
          << F(Num(md.value("frequency_hz", json())), 3) << " Hz"
          << (md.contains("frequency_std_hz") ? " &plusmn;" + F(Num(md["frequency_std_hz"]), 3) : "")
          << "</td><td class=\"n\">" << F(Num(md.value("model_frequency_hz", json())), 3)
          << " Hz</td><td class=\"n\">" << F(Num(md.value("mac", json())), 3) << "</td></tr>";
    }
    out << "</tbody></table><p class=\"foot\">Latest estimate " << latest.id << ", measured "
        << When(latest.measured_at_unix_ms) << ".</p></div></div><div class=\"two\"><div>";
    const json verdict = result.value("verdict", json());
    out << "<h3>Cautions and verdict</h3>";
    if (verdict.is_object()) {
      out << "<p><span class=\"sev sev-" << Esc(verdict.value("code", "")) << "\">"
          << Esc(verdict.value("code", "")) << "</span> " << Esc(verdict.value("summary", "")) << "</p>";
    }
    const json cautions = result.value("cautions", json::array());
    if (cautions.empty()) out << "<p class=\"muted\">No cautions.</p>";
    out << "<table><tbody>";
    for (const json& c : cautions) {
      out << "<tr><td>" << Severity(c) << "</td><td>" << Esc(c.value("message", c.value("code", "")))
          << "</td></tr>";
    }
    out << "</tbody></table></div><div>";
    storage::Record record;
    if (repo.GetRecord(org, latest.record_id, &record).ok()) {
      json sp;
      if (EstimateSpectrumJson(latest, record, 400, &sp).ok()) {
        out << "<h3>Spectrum of the latest record</h3>" << SpectrumChart(sp)
            << "<p class=\"foot\">First singular value of the spectral matrix; triangles: identified modes "
               "by "
               "order.</p>";
      }
    }
    out << "</div></div>";
  } else {
    out << "<p class=\"muted\">No estimate yet.</p>";
  }
  out << "<div class=\"two\"><div><h3>Alerts and their handling</h3>";
  if (alerts.empty())
    out << "<p class=\"muted\">No alerts.</p>";
  else {
    out << "<table><thead><tr><th>Rule</th><th>Raised</th><th>Handling</th></tr></thead><tbody>";
    for (const auto& a : alerts) {
      const std::string tier = estimation::RuleTier(a.rule);
      out << "<tr><td><span class=\"sev tier-" << tier << "\">" << tier << "</span> " << Esc(a.rule)
          << "</td><td>" << When(a.raised_at_unix_ms) << "</td><td>" << storage::AlertStateName(a.state)
          << (a.acknowledged_at_unix_ms ? ", acknowledged " + When(*a.acknowledged_at_unix_ms) : "")
          << (a.resolved_at_unix_ms ? ", resolved " + When(*a.resolved_at_unix_ms) : "") << "</td></tr>";
    }
    out << "</tbody></table>";
  }
  out << "</div><div><h3>Logbook</h3>";
  if (entries.empty())
    out << "<p class=\"muted\">No entries.</p>";
  else {
    out << "<table><thead><tr><th></th><th>When</th><th>What</th><th>By</th></tr></thead><tbody>";
    for (std::size_t i = 0; i < entries.size(); ++i) {
      const auto& e = entries[i];
      out << "<tr><td>L" << i + 1 << "</td><td>" << When(e.occurred_at_unix_ms) << "</td><td>" << Esc(e.kind)
          << (e.new_baseline ? " (new baseline)" : "") << (e.note.empty() ? "" : ": " + Esc(e.note))
          << "</td><td>" << Esc(e.author) << "</td></tr>";
    }
    out << "</tbody></table>";
  }
  out << "</div></div></section>";
  return Status::Ok();
}

}  // namespace

Status BuildInspectionReport(storage::Repository& repo, Id org, const ReportOptions& o, std::string* html) {
  if (o.from_unix_ms >= o.to_unix_ms)
    return Status::InvalidArgument("the report period is empty: from >= to");
  storage::Structure st;
  if (auto s = repo.GetStructure(org, o.structure_id, &st); !s.ok()) {
    return Fail("structure " + std::to_string(o.structure_id), s);
  }
  std::vector<storage::Member> members;
  if (auto s = repo.ListMembers(org, st.id, &members); !s.ok()) return Fail("members", s);
  std::vector<json> rows;
  for (const auto& m : members) {
    json row;
    if (auto s = MemberRowJson(repo, org, m, &row); !s.ok()) return Fail("member " + m.external_id, s);
    rows.push_back(std::move(row));
  }
  std::ostringstream out;
  out << "<!doctype html><html lang=\"en\"><head><meta charset=\"utf-8\"><title>Inspection report &middot; "
      << Esc(st.name) << "</title><style>" << kCss << "</style></head><body>";
  out << "<section class=\"cover\"><p class=\"kind\">Inspection report &middot; axial force "
         "monitoring</p><h1>"
      << Esc(st.name) << "</h1><p class=\"desc\">" << Esc(st.description) << "</p><dl><dt>Period</dt><dd>"
      << Day(o.from_unix_ms) << " to " << Day(o.to_unix_ms)
      << " (UTC, end exclusive)</dd><dt>Members</dt><dd>" << members.size() << "</dd><dt>Author</dt><dd>"
      << (o.author.empty() ? "<span class=\"fill\">&nbsp;</span>" : Esc(o.author))
      << "</dd><dt>Generated</dt><dd>" << When(o.now_unix_ms)
      << " by taut</dd></dl><div class=\"notice\"><b>Standing notice.</b> "
      << Esc(estimation::StandingNotice())
      << " Neither an alert nor its absence says that a member is safe.</div></section>";
  out << "<section class=\"sheet\"><h2>Portfolio</h2><p>The latest estimate of each member with its "
         "95&nbsp;% "
         "interval; the force ratio is the force over the design force (for a tie a low ratio is the "
         "danger); the "
         "30-day change is not temperature-compensated.</p>"
      << PortfolioTable(rows) << "<h2>Method</h2><div class=\"method\">" << kMethod
      << "</div></section><section class=\"sheet\"><h2>References</h2>" << kReferences;
  out << "<h2>Sign-off</h2><p>The estimates in this report support inspection planning. The responsible "
         "engineer "
         "has reviewed the member sheets, the cautions and the alerts above.</p><div "
         "class=\"signature\"><div>"
         "Responsible engineer: "
      << Esc(o.author)
      << "</div><div>Signature and date</div><div>Licence or registration "
         "number</div><div>Remarks</div></div>"
         "</section>";
  for (std::size_t i = 0; i < members.size(); ++i) {
    if (Status s = MemberSheet(repo, org, st, members[i], rows[i], o, out); !s.ok()) return s;
  }
  out << "</body></html>\n";
  *html = out.str();
  return Status::Ok();
}

Status PrintHtmlToPdf(const std::string& html, const std::string& pdf_path) {
  const char* env = std::getenv("TAUT_CHROMIUM");
  const std::string chromium = env && *env ? env : "/usr/bin/chromium";
  if (::access(chromium.c_str(), X_OK) != 0) {
    return Status::InvalidArgument("PDF printing needs Chromium at " + chromium +
                                   " (set TAUT_CHROMIUM); the HTML report prints from any browser");
  }
  char tmpl[] = "/tmp/taut-report-XXXXXX";
  if (!::mkdtemp(tmpl)) return Status::InvalidArgument("cannot make a temporary directory");
  const std::filesystem::path dir(tmpl);
  { std::ofstream(dir / "report.html") << html; }
  const std::string out_abs = std::filesystem::absolute(pdf_path).string();
  std::error_code ec;
  std::filesystem::remove(out_abs, ec);
  // posix_spawn rather than system(): no shell, and the child starts with
  // an empty signal mask (taut serve blocks SIGINT/SIGTERM in every thread,
  // and a mask is inherited across exec) and its own process group.
  std::vector<std::string> args = {chromium,
                                   "--headless",
                                   "--no-sandbox",
                                   "--disable-gpu",
                                   "--disable-quic",
                                   "--no-first-run",
                                   "--disable-background-networking",
                                   "--disable-component-update",
                                   "--disable-sync",
                                   "--disable-extensions",
                                   "--no-pdf-header-footer",
                                   "--user-data-dir=" + (dir / "profile").string(),
                                   "--print-to-pdf=" + out_abs,
                                   "file://" + (dir / "report.html").string()};
  std::vector<char*> argv;
  for (auto& a : args) argv.push_back(a.data());
  argv.push_back(nullptr);
  const std::string log_path = (dir / "chromium.log").string();
  posix_spawn_file_actions_t files;
  posix_spawn_file_actions_init(&files);
  posix_spawn_file_actions_addopen(&files, STDOUT_FILENO, log_path.c_str(), O_WRONLY | O_CREAT | O_TRUNC,
                                   0600);
  posix_spawn_file_actions_adddup2(&files, STDOUT_FILENO, STDERR_FILENO);
  posix_spawnattr_t attr;
  posix_spawnattr_init(&attr);
  sigset_t none;
  sigemptyset(&none);
  posix_spawnattr_setsigmask(&attr, &none);
  posix_spawnattr_setpgroup(&attr, 0);
  posix_spawnattr_setflags(&attr, POSIX_SPAWN_SETSIGMASK | POSIX_SPAWN_SETPGROUP);
  pid_t pid = 0;
  const int spawned = posix_spawn(&pid, chromium.c_str(), &files, &attr, argv.data(), environ);
  posix_spawn_file_actions_destroy(&files);
  posix_spawnattr_destroy(&attr);
  std::string failure;
  if (spawned != 0) {
    failure = "cannot start " + chromium + ": " + std::strerror(spawned);
  } else {
    int status = 0;
    const auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(kPdfTimeout_s);
    for (;;) {
      const pid_t r = ::waitpid(pid, &status, WNOHANG);
      if (r == pid || r < 0) break;
      if (std::chrono::steady_clock::now() > deadline) {
        ::kill(-pid, SIGKILL);  // the whole group: Chromium's helper processes too
        ::waitpid(pid, &status, 0);
        failure = "Chromium took longer than " + std::to_string(kPdfTimeout_s) + " s";
        break;
      }
      std::this_thread::sleep_for(std::chrono::milliseconds(50));
    }
  }
  const bool made = std::filesystem::exists(out_abs, ec) && std::filesystem::file_size(out_abs, ec) > 0;
  if (!made && failure.empty()) {
    std::ifstream in(log_path);
    std::stringstream ss;
    ss << in.rdbuf();
    failure = "Chromium did not print the PDF: " + ss.str().substr(0, 2000);
  }
  std::filesystem::remove_all(dir, ec);
  if (!made) return Status::InvalidArgument(failure);
  return Status::Ok();
}

}  // namespace taut::server
