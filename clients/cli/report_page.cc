// The HTML document of `rimwatch report` (report_page.h).
#include "report_page.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <limits>
#include <map>
#include <set>
#include <sstream>

#include "report_chart.h"

namespace rimwatch::cli {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr double kZ95 = 1.959963984540054;    // two-sided 95% normal quantile (common practice)
constexpr double kCharWidth = 6.6;            // estimated width of one 11-unit label character
constexpr std::size_t kTrailSnapshots = 200;  // earlier snapshots drawn in the eigenvalue trail
constexpr double kPValueFloor = 1e-16;        // p-values below are drawn at this level

std::string H(const std::string& text) { return EscapeXml(text); }

// Lets a long monitor name wrap after its dots only.
std::string BreakAtDots(std::string text) {
  for (std::size_t at = text.find('.'); at != std::string::npos; at = text.find('.', at + 6)) {
    text.insert(at + 1, "<wbr>");
  }
  return text;
}

std::string Fmt(double v, int digits = 4) { return FormatValue(v, digits); }

bool Finite(double v) { return std::isfinite(v); }

double FiniteMax(const std::vector<double>& v,
                 double init = -std::numeric_limits<double>::infinity()) {
  for (double x : v)
    if (Finite(x)) init = std::max(init, x);
  return init;
}
double FiniteMin(const std::vector<double>& v,
                 double init = std::numeric_limits<double>::infinity()) {
  for (double x : v)
    if (Finite(x)) init = std::min(init, x);
  return init;
}

// ---------------------------------------------------------------------------------------------
// Alert spans: raised-to-cleared intervals per monitor. A raise while a span is open (warn ->
// critical) closes it and opens one at the new level; a span still open at the last row is drawn
// to that row and marked open.

struct AlertSpan {
  std::string monitor;
  AlertLevel level = AlertLevel::kWarn;
  std::int64_t from = 0, to = 0;
  bool open = false;
};

std::vector<AlertSpan> AlertSpans(const std::vector<AlertEvent>& alerts, std::int64_t last_row) {
  std::vector<AlertSpan> out;
  std::map<std::string, std::size_t> open;  // monitor -> index in out
  for (const AlertEvent& ev : alerts) {
    auto it = open.find(ev.monitor);
    if (it != open.end()) {
      out[it->second].to = ev.row;
      out[it->second].open = false;
      open.erase(it);
    }
    if (ev.raised) {
      open[ev.monitor] = out.size();
      out.push_back(AlertSpan{ev.monitor, ev.level, ev.row, last_row, true});
    }
  }
  for (auto& [monitor, i] : open) out[i].to = std::max(out[i].to, out[i].from);
  return out;
}

const char* LevelClass(AlertLevel level) {
  return level == AlertLevel::kCritical ? "crit" : "warn";
}

// ---------------------------------------------------------------------------------------------
// The row axis shared by a model's charts: model rows, labelled with the period text of the
// recorded row nearest to each nice tick, as many labels as fit the width.

struct RowAxis {
  double lo = 0.0, hi = 1.0;
  std::size_t label_chars = 4;
  std::string title;
};

RowAxis MakeRowAxis(const ModelHistory& h) {
  RowAxis a;
  if (h.rows.empty()) return a;
  a.lo = static_cast<double>(h.rows.front());
  a.hi = static_cast<double>(h.rows.back());
  if (a.hi <= a.lo) {
    a.lo -= 1.0;
    a.hi += 1.0;
  }
  for (const std::string& p : h.periods) a.label_chars = std::max(a.label_chars, p.size());
  a.title = "period (model rows " + std::to_string(h.rows.front()) + "\u2013" +
            std::to_string(h.rows.back()) + ")";
  return a;
}

void ApplyRowAxis(const ModelHistory& h, const RowAxis& a, SvgChart* chart) {
  chart->LinearX(a.lo, a.hi);
  const double width = chart->plot_right() - chart->plot_left();
  const int max_ticks = std::max(
      2, static_cast<int>(width / (kCharWidth * static_cast<double>(a.label_chars) + 22.0)));
  Ticks t = NiceTicks(a.lo, a.hi, max_ticks);
  if (t.step < 1.0) t = NiceTicks(a.lo, a.hi, static_cast<int>(a.hi - a.lo) + 1);
  std::vector<double> at;
  std::vector<std::string> labels;
  std::set<std::size_t> used;
  for (double v : t.values) {
    std::size_t i = 0;
    const std::string& period = h.PeriodNear(v, &i);
    if (h.rows.empty() || !used.insert(i).second) continue;
    at.push_back(static_cast<double>(h.rows[i]));
    labels.push_back(H(period));
  }
  chart->XAxis(at, labels, a.title);
}

void ApplyValueAxis(SvgChart* chart, double lo, double hi, const std::string& title) {
  const int max_ticks =
      std::max(3, static_cast<int>((chart->plot_bottom() - chart->plot_top()) / 30.0));
  const Ticks t = LooseTicks(&lo, &hi, max_ticks);
  chart->LinearY(lo, hi);
  std::vector<std::string> labels;
  for (double v : t.values) labels.push_back(FormatTick(v, t.decimals));
  chart->YAxis(t.values, labels, title);
}

// "10<tspan>-3</tspan>" style labels for a decade axis, plain text for 1, 0.1 and 0.01.
std::string DecadeLabel(double v) {
  const int e = static_cast<int>(std::lround(std::log10(v)));
  if (e >= -2 && e <= 0) return FormatTick(v, -e);
  return "10<tspan dy=\"-5\" font-size=\"8\">" + std::string(e < 0 ? "\u2212" : "") +
         std::to_string(std::abs(e)) + "</tspan>";
}

std::vector<double> RowsAsX(const ModelHistory& h) {
  return std::vector<double>(h.rows.begin(), h.rows.end());
}

// Unarmed stretches of a monitor (training, restart, statistic unavailable), shaded grey.
void ShadeUnarmed(const ModelHistory& h, const MonitorTrack& t, SvgChart* chart) {
  std::size_t i = 0;
  while (i < h.rows.size()) {
    if (t.armed[i]) {
      ++i;
      continue;
    }
    std::size_t j = i;
    while (j + 1 < h.rows.size() && !t.armed[j + 1]) ++j;
    chart->ShadeX(static_cast<double>(h.rows[i]) - 0.5, static_cast<double>(h.rows[j]) + 0.5,
                  "unarmed");
    i = j + 1;
  }
}

void ShadeSpans(const std::vector<AlertSpan>& spans, const std::string& monitor, SvgChart* chart) {
  for (const AlertSpan& s : spans) {
    if (s.monitor != monitor) continue;
    chart->ShadeX(static_cast<double>(s.from), static_cast<double>(s.to),
                  std::string("span-bg ") + LevelClass(s.level));
  }
}

std::string Figure(const std::string& heading, const std::string& svg, const std::string& caption,
                   const std::string& extra_class = "") {
  std::string out = "<figure class=\"chart-figure" +
                    (extra_class.empty() ? "" : " " + extra_class) + "\"><h4>" + heading + "</h4>" +
                    svg;
  if (!caption.empty()) out += "<figcaption>" + caption + "</figcaption>";
  return out + "</figure>\n";
}

// ---------------------------------------------------------------------------------------------
// One model's section.

class ModelSection {
 public:
  ModelSection(const ModelHistory& h, int index, const ReportPageOptions& options)
      : h_(h), index_(index), options_(options), axis_(MakeRowAxis(h)) {
    prefix_ = "m" + std::to_string(index) + "-";
    spans_ = AlertSpans(h.alerts, h.rows.empty() ? 0 : h.rows.back());
  }

  std::string Render();

 private:
  std::string Id(const std::string& what) const { return prefix_ + what; }
  std::string Header() const;
  std::string StatusLine() const;
  std::string StabilityPart();
  std::string RhoFigure();
  std::string EigenFigure();
  std::string RestrictionsPart();
  std::string SequentialPart();
  std::string ConstancyPart();
  std::string DiagnosticsPart();
  std::string OtherMonitorsPart();
  std::string AlertsPart();
  std::string CoefficientsPart();
  std::string MonitorFigure(const std::string& monitor, const std::string& heading,
                            const std::string& y_title, const std::string& caption, ChartBox box,
                            bool small = false);
  std::string Heading(const std::string& title) {
    ++part_;
    return "<h3><span class=\"part\">" + std::to_string(part_) + "</span>" + title + "</h3>\n";
  }
  std::string FigureNumber() {
    ++figure_;
    return "Figure " + std::to_string(index_) + "." + std::to_string(figure_) + " ";
  }
  bool Has(const std::string& monitor) const { return h_.monitors.count(monitor) != 0; }
  std::string LastRowText() const;

  const ModelHistory& h_;
  int index_;
  const ReportPageOptions& options_;
  RowAxis axis_;
  std::string prefix_;
  std::vector<AlertSpan> spans_;
  std::set<std::string> drawn_;  // monitors with a chart already
  int part_ = 0;
  int figure_ = 0;
};

std::string WindowText(const ModelSpec& s) {
  const WindowOptions& w = s.var.window;
  std::ostringstream o;
  o << WindowKindName(w.kind);
  if (w.kind == WindowKind::kSliding) o << ", " << w.rows << " rows";
  if (w.kind == WindowKind::kForgetting) {
    o << ", \u03bb = " << w.lambda << " (memory ~" << std::lround(1.0 / (1.0 - w.lambda))
      << " rows)";
  }
  return o.str();
}

std::string ModelSection::Header() const {
  std::ostringstream o;
  o << "<div class=\"model-head\"><h2>" << H(h_.model.name) << "</h2><span class=\"model-meta\">"
    << "model id " << h_.model.id << " \u00b7 added " << H(h_.model.added_at);
  if (h_.model.dropped_at) o << " \u00b7 <b>dropped " << H(*h_.model.dropped_at) << "</b>";
  o << "</span></div>\n<dl class=\"facts\">";
  auto fact = [&](const std::string& k, const std::string& v) {
    o << "<div><dt>" << k << "</dt><dd>" << v << "</dd></div>";
  };
  const std::vector<std::string> vars = ModelVariables(h_);
  std::string joined;
  for (const std::string& v : vars) joined += (joined.empty() ? "" : ", ") + H(v);
  fact("variables", joined.empty() ? "n/a" : joined);
  if (h_.spec_parsed) {
    const ModelSpec& s = h_.spec;
    fact("lags", std::to_string(s.var.lags));
    fact("deterministic", DeterministicName(s.var.deterministic));
    std::string transforms;
    for (std::size_t i = 0; i < s.transforms.size() && i < vars.size(); ++i) {
      if (s.transforms[i] == Transform::kLevel) continue;
      transforms +=
          (transforms.empty() ? "" : ", ") + H(vars[i]) + ": " + TransformName(s.transforms[i]);
    }
    fact("transforms", transforms.empty() ? "levels" : transforms);
    fact("window", H(WindowText(s)));
    fact("covariance",
         std::string(CovarianceKindName(s.inference.covariance.kind)) +
             (s.inference.every > 1 ? ", every " + std::to_string(s.inference.every) + " rows"
                                    : ""));
    fact("training rows", std::to_string(s.training_rows));
  }
  if (!h_.rows.empty()) {
    fact("rows recorded", std::to_string(h_.rows.size()) + " (model rows " +
                              std::to_string(h_.rows.front()) + "\u2013" +
                              std::to_string(h_.rows.back()) + ")");
    fact("first period", H(h_.periods.front()));
    fact("last period", H(h_.periods.back()));
  }
  fact("snapshots", std::to_string(h_.snapshots.size()));
  std::size_t raised = 0;
  for (const AlertEvent& ev : h_.alerts) raised += ev.raised ? 1 : 0;
  fact("alert transitions", std::to_string(h_.alerts.size()) + " (" + std::to_string(raised) +
                                " raised, " + std::to_string(h_.alerts.size() - raised) +
                                " cleared)");
  o << "</dl>\n";
  if (!h_.spec_parsed) {
    o << "<p class=\"warning\">The stored spec does not parse with this build (" << H(h_.spec_error)
      << "); the header shows what the records carry.</p>\n";
  }
  if (h_.rows_not_estimable > 0) {
    o << "<p class=\"warning\">" << h_.rows_not_estimable
      << " recorded rows had no usable estimate (the last said: " << H(h_.last_not_estimable)
      << "); their statistics are gaps in the charts.</p>\n";
  }
  o << "<details class=\"spec\"><summary>Model spec as stored (TOML)</summary><pre>"
    << H(h_.model.spec_text) << "</pre></details>\n";
  return o.str();
}

std::string ModelSection::StatusLine() const {
  std::ostringstream o;
  std::vector<const AlertSpan*> open;
  for (const AlertSpan& s : spans_)
    if (s.open) open.push_back(&s);
  o << "<div class=\"now\"><span class=\"now-label\">At the last row (" << H(h_.periods.back())
    << "):</span> ";
  if (open.empty()) {
    o << "<span class=\"chip quiet\">no alert active</span>";
  }
  for (const AlertSpan* s : open) {
    std::size_t i = 0;
    h_.PeriodNear(static_cast<double>(s->from), &i);
    o << "<span class=\"chip " << LevelClass(s->level) << "\">" << H(s->monitor) << " \u00b7 "
      << AlertLevelName(s->level) << " since " << H(h_.periods[i]) << "</span> ";
  }
  o << "</div>\n";
  return o.str();
}

std::string ModelSection::LastRowText() const { return H(h_.periods.back()); }

std::string ModelSection::MonitorFigure(const std::string& monitor, const std::string& heading,
                                        const std::string& y_title, const std::string& caption,
                                        ChartBox box, bool small) {
  drawn_.insert(monitor);
  const MonitorTrack& t = h_.monitors.at(monitor);
  const std::size_t n = h_.rows.size();
  std::vector<double> stat(n, kNaN), warn(n, kNaN), crit(n, kNaN);
  for (std::size_t i = 0; i < n; ++i) {
    if (!t.armed[i]) continue;
    stat[i] = t.statistic[i];
    warn[i] = t.warn[i];
    crit[i] = t.critical[i];
  }
  const double thr = std::max(FiniteMax(warn), FiniteMax(crit));
  double lo = std::min({0.0, FiniteMin(stat), FiniteMin(warn), FiniteMin(crit)});
  double hi = std::max({FiniteMax(stat), thr});
  std::string note;
  const double data_max = FiniteMax(stat);
  if (Finite(thr) && thr > 0.0 && data_max > 4.0 * thr) {
    // Keep the levels readable: values above 4x the highest level run off the top.
    std::size_t at = 0;
    for (std::size_t i = 0; i < n; ++i)
      if (stat[i] == data_max) at = i;
    hi = 4.0 * thr;
    note = "off scale above " + Fmt(hi, 3) + " (peak " + Fmt(data_max, 4) + " at " +
           h_.periods[at] + ")";
  }
  if (!Finite(lo) || !Finite(hi)) {
    lo = 0.0;
    hi = 1.0;
  }
  SvgChart chart(Id(monitor), heading, box);
  ApplyRowAxis(h_, axis_, &chart);
  ApplyValueAxis(&chart, lo, hi + 0.04 * (hi - lo), y_title);
  ShadeUnarmed(h_, t, &chart);
  ShadeSpans(spans_, monitor, &chart);
  const std::vector<double> x = RowsAsX(h_);
  chart.Line(x, warn, "lvl warn");
  chart.Line(x, crit, "lvl crit");
  const std::size_t drawn = chart.Line(x, stat, "data");
  if (!note.empty()) {
    chart.Label(chart.plot_right() - 6, chart.plot_top() + 14, note, "note", "end");
  }
  if (drawn == 0) {
    chart.Label(0.5 * (chart.plot_left() + chart.plot_right()),
                0.5 * (chart.plot_top() + chart.plot_bottom()), "never armed in the recorded rows",
                "note", "middle");
  }
  std::vector<LegendItem> legend = {{LegendItem::Kind::kLine, "data", "statistic"},
                                    {LegendItem::Kind::kLine, "lvl warn", "warn"}};
  if (Finite(FiniteMax(crit))) legend.push_back({LegendItem::Kind::kLine, "lvl crit", "critical"});
  if (!small) {
    legend.push_back({LegendItem::Kind::kBlock, "unarmed", "not armed"});
    legend.push_back({LegendItem::Kind::kBlock, "span-bg warn", "alert span"});
  }
  chart.Legend(legend);
  std::string cap = caption;
  // The last armed reading, for the record.
  for (std::size_t i = n; i-- > 0;) {
    if (!t.armed[i]) continue;
    cap += (cap.empty() ? "" : " ") + std::string("Last armed reading (") + H(h_.periods[i]) +
           "): " + Fmt(t.statistic[i]) + " against warn " + Fmt(t.warn[i]) +
           (Finite(t.critical[i]) ? " and critical " + Fmt(t.critical[i]) : std::string()) + ".";
    break;
  }
  return Figure(FigureNumber() + H(heading), chart.Svg(), cap, small ? "small" : "");
}

// ---------------------------------------------------------------------------------------------
// Stability

std::string ModelSection::RhoFigure() {
  const std::size_t n = h_.rows.size();
  std::vector<double> lo(n, kNaN), hi(n, kNaN), warn(n, kNaN), crit(n, kNaN);
  for (std::size_t i = 0; i < n; ++i) {
    if (Finite(h_.rho[i]) && Finite(h_.rho_se[i])) {
      lo[i] = h_.rho[i] - kZ95 * h_.rho_se[i];
      hi[i] = h_.rho[i] + kZ95 * h_.rho_se[i];
    }
  }
  const bool monitored = Has("stability");
  if (monitored) {
    drawn_.insert("stability");
    const MonitorTrack& t = h_.monitors.at("stability");
    for (std::size_t i = 0; i < n; ++i) {
      if (!t.armed[i]) continue;
      warn[i] = t.warn[i];
      crit[i] = t.critical[i];
    }
  } else if (h_.spec_parsed) {
    std::fill(warn.begin(), warn.end(), h_.spec.stability.warn);
    std::fill(crit.begin(), crit.end(), h_.spec.stability.critical);
  }
  // The axis is fitted to the rows the stability monitor judges (after training) when there are
  // any: the first rows' windows are tiny and their estimates can be wild. Earlier values
  // outside run off the chart, and the caption says so.
  std::vector<double> judged = h_.rho, judged_lo = lo, judged_hi = hi;
  if (monitored) {
    const MonitorTrack& t = h_.monitors.at("stability");
    if (std::find(t.armed.begin(), t.armed.end(), 1) != t.armed.end()) {
      for (std::size_t i = 0; i < n; ++i) {
        if (t.armed[i]) continue;
        judged[i] = judged_lo[i] = judged_hi[i] = kNaN;
      }
    }
  }
  double y_lo = std::min({FiniteMin(judged), FiniteMin(judged_lo), FiniteMin(warn)});
  double y_hi = std::max({1.0, FiniteMax(judged), FiniteMax(judged_hi), FiniteMax(crit)});
  if (!Finite(y_lo)) y_lo = 0.0;
  // A band that runs far out (an SE blowing up on a near-singular window) should not flatten the
  // estimate: limit the axis to 0.5 beyond the estimate's own range.
  y_lo = std::max(y_lo, FiniteMin(judged) - 0.5);
  y_hi = std::min(y_hi, std::max(1.0, FiniteMax(judged)) + 0.5);
  y_lo = std::max(0.0, y_lo - 0.03);
  std::size_t off_scale = 0;
  double off_max = -std::numeric_limits<double>::infinity();
  for (std::size_t i = 0; i < n; ++i) {
    if (Finite(h_.rho[i]) && (h_.rho[i] > y_hi + 0.01 || h_.rho[i] < y_lo)) {
      ++off_scale;
      off_max = std::max(off_max, h_.rho[i]);
    }
  }
  SvgChart chart(Id("rho"), "Spectral radius of the companion matrix", ChartBox{});
  ApplyRowAxis(h_, axis_, &chart);
  ApplyValueAxis(&chart, y_lo, y_hi + 0.01, "spectral radius \u03c1 (modulus)");
  if (monitored) ShadeUnarmed(h_, h_.monitors.at("stability"), &chart);
  ShadeSpans(spans_, "stability", &chart);
  const std::vector<double> x = RowsAsX(h_);
  chart.Band(x, lo, hi, "band");
  chart.RuleY(1.0, "unit");
  chart.Line(x, warn, "lvl warn");
  chart.Line(x, crit, "lvl crit");
  chart.Line(x, h_.rho, "data");
  chart.Legend({{LegendItem::Kind::kLine, "data", "\u03c1"},
                {LegendItem::Kind::kBand, "band", "\u03c1 \u00b1 1.96 SE"},
                {LegendItem::Kind::kLine, "lvl warn", "warn"},
                {LegendItem::Kind::kLine, "lvl crit", "critical"},
                {LegendItem::Kind::kLine, "unit", "unit root (1)"}});
  std::ostringstream cap;
  cap << "The largest eigenvalue modulus of the companion matrix of the tracking estimate, per "
         "row. The band is \u03c1 \u00b1 1.96 SE (delta method, the model's covariance kind) "
         "where the SE exists; the critical level drops below its set value when the upper "
         "one-sided 95% bound \u03c1 + 1.645 SE would reach 1. Grey: monitor not armed (training).";
  if (off_scale > 0) {
    cap << " The axis fits the rows the monitor judges; " << off_scale
        << " earlier rows run off it (ρ up to " << Fmt(off_max) << " on the first, small "
        << "windows).";
  }
  const std::size_t last = n - 1;
  cap << " Last row (" << LastRowText() << "): \u03c1 = " << Fmt(h_.rho[last]);
  if (Finite(h_.rho_se[last])) cap << ", SE " << Fmt(h_.rho_se[last], 3);
  if (Finite(h_.rows_to_unit[last])) {
    cap << "; at its recent slope \u03c1 would reach 1 in about "
        << std::lround(h_.rows_to_unit[last]) << " rows";
  }
  cap << ".";
  return Figure(FigureNumber() + "Spectral radius", chart.Svg(), cap.str());
}

std::string ModelSection::EigenFigure() {
  // The plot rectangle is square, so both axes share one scale and circles stay round.
  ChartBox box;
  box.width = 430;
  box.left = 58;
  box.right = 14;
  box.top = 30;
  box.bottom = 46;
  box.height = box.top + box.bottom + (box.width - box.left - box.right);
  SvgChart chart(Id("eigen"), "Companion eigenvalues in the complex plane", box);
  const std::size_t count = h_.snapshots.size();
  const std::size_t first = count > kTrailSnapshots + 1 ? count - kTrailSnapshots - 1 : 0;
  double radius = 1.0;
  for (std::size_t s = first; s < count; ++s)
    for (const auto& e : h_.snapshots[s].eigenvalues)
      if (Finite(std::abs(e))) radius = std::max(radius, std::abs(e));
  const double lo = -radius * 1.08, hi = radius * 1.08;
  const Ticks t = NiceTicks(lo, hi, 9);
  chart.LinearX(lo, hi);
  chart.LinearY(lo, hi);
  std::vector<std::string> labels;
  for (double v : t.values) labels.push_back(FormatTick(v, t.decimals));
  chart.XAxis(t.values, labels, "real part");
  chart.YAxis(t.values, labels, "imaginary part");
  chart.Raw("<line class=\"zero\" x1=\"" + Coord(chart.x()(lo)) + "\" x2=\"" +
                Coord(chart.x()(hi)) + "\" y1=\"" + Coord(chart.y()(0)) + "\" y2=\"" +
                Coord(chart.y()(0)) + "\"/><line class=\"zero\" x1=\"" + Coord(chart.x()(0)) +
                "\" x2=\"" + Coord(chart.x()(0)) + "\" y1=\"" + Coord(chart.y()(lo)) + "\" y2=\"" +
                Coord(chart.y()(hi)) + "\"/>",
            true);
  double warn = kNaN, crit = kNaN;
  if (h_.spec_parsed) {
    warn = h_.spec.stability.warn;
    crit = h_.spec.stability.critical;
    chart.DataCircle(warn, "lvl warn");
    chart.DataCircle(crit, "lvl crit");
  }
  chart.DataCircle(1.0, "unit-circle");
  for (std::size_t s = first; s + 1 < count; ++s) {
    const double age = static_cast<double>(s - first + 1) / static_cast<double>(count - first);
    for (const auto& e : h_.snapshots[s].eigenvalues) {
      chart.Dot(e.real(), e.imag(), 2.2, "eig-trail", 0.08 + 0.42 * age);
    }
  }
  std::string cap;
  std::string table;
  if (count == 0) {
    chart.Label(0.5 * (chart.plot_left() + chart.plot_right()), chart.plot_top() + 20,
                "no snapshot recorded yet", "note", "middle");
    cap =
        "No snapshot has been recorded yet (the daemon and replay write one every 100 model "
        "rows by default).";
  } else {
    const Snapshot& last = h_.snapshots.back();
    for (const auto& e : last.eigenvalues) chart.Dot(e.real(), e.imag(), 4.5, "eig-last");
    std::vector<std::complex<double>> sorted = last.eigenvalues;
    std::sort(sorted.begin(), sorted.end(),
              [](const auto& a, const auto& b) { return std::abs(a) > std::abs(b); });
    table = "<table class=\"eig\"><caption>Last snapshot, " + H(last.period) + " (row " +
            std::to_string(last.row) +
            ")</caption><thead><tr><th>real</th><th>imag.</th><th>modulus</th></tr></thead><tbody>";
    for (const auto& e : sorted) {
      table += "<tr><td>" + Fmt(e.real()) + "</td><td>" + Fmt(e.imag()) + "</td><td>" +
               Fmt(std::abs(e)) + "</td></tr>";
    }
    table += "</tbody></table>";
    cap = "Eigenvalues of the companion matrix at the last snapshot (large dots) and at up to " +
          std::to_string(kTrailSnapshots) + " earlier snapshots (" +
          std::to_string(count - 1 - first) +
          " drawn, fading with age). Solid black: the unit circle; dashed and solid colour: the "
          "warn and critical radii.";
  }
  chart.Legend({{LegendItem::Kind::kDot, "eig-last", "last"},
                {LegendItem::Kind::kDot, "eig-trail", "earlier"}});
  (void)warn;
  (void)crit;
  return "<figure class=\"chart-figure eigen\"><h4>" + FigureNumber() +
         "Companion eigenvalues</h4><div class=\"side\"><div class=\"square\">" + chart.Svg() +
         "</div>" + table + "</div><figcaption>" + cap + "</figcaption></figure>\n";
}

std::string ModelSection::StabilityPart() {
  // One statement per call: figure numbers follow the page order.
  std::string out = Heading("Stability");
  out += RhoFigure();
  out += EigenFigure();
  return out;
}

// ---------------------------------------------------------------------------------------------
// Restrictions

std::string ModelSection::RestrictionsPart() {
  std::set<std::string> names(h_.restriction_names.begin(), h_.restriction_names.end());
  std::vector<std::string> order = h_.restriction_names;
  for (const std::string& m : h_.monitor_names) {
    if (m.rfind("restriction.", 0) == 0 && names.insert(m.substr(12)).second) {
      order.push_back(m.substr(12));
    }
  }
  if (order.empty()) return "";
  std::string out = Heading("Monitored restrictions");
  for (const std::string& name : order) {
    const std::string monitor = "restriction." + name;
    auto it = h_.restrictions.find(name);
    if (it != h_.restrictions.end()) {
      const RestrictionTrack& r = it->second;
      std::vector<double> p(r.p_value.size(), kNaN);
      bool floored = false;
      double p_min = 1.0;
      for (std::size_t i = 0; i < p.size(); ++i) {
        if (!Finite(r.p_value[i])) continue;
        p[i] = std::clamp(r.p_value[i], kPValueFloor, 1.0);
        floored = floored || r.p_value[i] < kPValueFloor;
        p_min = std::min(p_min, p[i]);
      }
      const double lo = std::pow(10.0, std::floor(std::log10(std::min(p_min, 0.01))));
      SvgChart chart(Id(monitor + "-pvalue"), "Rolling robust Wald p-value of " + name, ChartBox{});
      ApplyRowAxis(h_, axis_, &chart);
      chart.LogY(lo, 1.0);
      std::vector<std::string> labels;
      const std::vector<double> decades = DecadeTicks(lo, 1.0, 7);
      for (double v : decades) labels.push_back(DecadeLabel(v));
      chart.YAxis(decades, labels, "p-value (log scale)");
      ShadeSpans(spans_, monitor, &chart);
      chart.RuleY(0.05, "ref");
      chart.Line(RowsAsX(h_), p, "data");
      chart.Legend({{LegendItem::Kind::kLine, "data", "p-value"},
                    {LegendItem::Kind::kLine, "ref", "0.05, one look"}});
      std::ostringstream cap;
      cap << "The robust Wald test of the restriction on the tracking window, at every row with "
             "robust statistics";
      if (r.df > 0) cap << " (\u03c7\u00b2 with " << r.df << " degrees of freedom)";
      cap << ". The dotted 0.05 line is the size of one look only: a path of many dependent "
             "looks crosses it far more often than 5% under the restriction, so alarms come "
             "from the scan below, whose thresholds hold the false-alarm chance over the "
             "horizon.";
      if (floored) cap << " p-values below 1e-16 are drawn at 1e-16.";
      if (r.unavailable > 0) {
        cap << " Not computable on " << r.unavailable
            << " rows (last reason: " << H(r.last_unavailable) << ").";
      }
      for (std::size_t i = p.size(); i-- > 0;) {
        if (!Finite(r.p_value[i])) continue;
        cap << " Last (" << H(h_.periods[i]) << "): W = " << Fmt(r.statistic[i])
            << ", p = " << Fmt(r.p_value[i], 3) << ".";
        break;
      }
      out += Figure(FigureNumber() + "Restriction " + H(name) + ": rolling p-value", chart.Svg(),
                    cap.str());
    }
    if (Has(monitor)) {
      out += MonitorFigure(monitor, "Restriction " + name + ": alarm scan",
                           "scan statistic (\u03c7\u00b2-like units)",
                           "The sequential scan of the restriction on its own reference sample "
                           "against simulated warn and critical thresholds that hold the chance "
                           "of any false alarm over the monitoring horizon; it restarts on fresh "
                           "rows after a critical alarm.",
                           ChartBox{});
    }
  }
  return out;
}

// ---------------------------------------------------------------------------------------------
// Sequential monitors, constancy, diagnostics, anything else

std::string ModelSection::SequentialPart() {
  std::string out;
  for (const std::string& m : h_.monitor_names) {
    if (m.rfind("cusum", 0) == 0) {
      out += MonitorFigure(
          m, "CUSUM of recursive residuals" + (m.size() > 5 ? " (" + m.substr(6) + ")" : ""),
          "max |S| / critical boundary",
          "The open-ended CUSUM of each equation's standardised recursive residuals after "
          "training, as the largest ratio |S| / boundary over the equations: the critical "
          "boundary is 1 by construction, the warn boundary its ratio below 1. It restarts on "
          "fresh rows after a critical alarm.",
          ChartBox{});
    }
  }
  for (const std::string& m : h_.monitor_names) {
    if (m.rfind("volatility", 0) == 0) {
      out += MonitorFigure(m, "Volatility regime", "CUSUM / critical level",
                           "A one-sided CUSUM of the squared norm of the standardised recursive "
                           "residuals, normalised so that the simulated critical level is 1; it "
                           "rises when the errors grow larger than in training.",
                           ChartBox{});
    }
  }
  return out.empty() ? out : Heading("Sequential monitors") + out;
}

std::string ModelSection::ConstancyPart() {
  std::string out;
  for (const std::string& m : h_.monitor_names) {
    if (m.rfind("constancy.", 0) != 0) continue;
    const bool nyblom = m == "constancy.nyblom_hansen";
    out += MonitorFigure(
        m, nyblom ? "Parameter constancy: Nyblom-Hansen" : "Parameter constancy: " + m.substr(10),
        nyblom ? "Nyblom-Hansen L" : "Wald W",
        nyblom ? "The robust Nyblom-Hansen statistic of all coefficients on each block of recent "
                 "rows, held between evaluations; levels are Bonferroni-split over the "
                 "evaluations of the horizon."
               : "The robust Wald test that the reference sample and the latest block share "
                 "their coefficients, held between evaluations; levels are Bonferroni-split over "
                 "the evaluations of the horizon.",
        ChartBox{});
  }
  return out.empty() ? out : Heading("Parameter constancy") + out;
}

std::string ModelSection::DiagnosticsPart() {
  std::string charts;
  ChartBox box;
  box.width = 470;
  box.height = 180;
  box.left = 54;
  for (const std::string& m : h_.monitor_names) {
    if (m.rfind("diagnostics.", 0) != 0) continue;
    charts += MonitorFigure(m, m.substr(12), "\u2212log10 p", "", box, true);
  }
  if (charts.empty()) return "";
  return Heading("Residual checks") +
         "<p class=\"lead\">Misspecification tests on the last training-length block of "
         "residuals, as \u2212log10 p against the Bonferroni warn level of the horizon. They "
         "are advisory (warn only): when one fails, standard errors, tests and alerts of this "
         "model may be off.</p>\n<div class=\"grid2\">" +
         charts + "</div>\n";
}

std::string ModelSection::OtherMonitorsPart() {
  std::string out;
  for (const std::string& m : h_.monitor_names) {
    if (drawn_.count(m) != 0) continue;
    out += MonitorFigure(m, m, "statistic", "", ChartBox{});
  }
  return out.empty() ? out : Heading("Other monitors") + out;
}

// ---------------------------------------------------------------------------------------------
// Alerts

std::string ModelSection::AlertsPart() {
  std::vector<std::string> lanes;
  std::set<std::string> seen;
  for (const std::string& m : h_.monitor_names) {
    for (const AlertSpan& s : spans_) {
      if (s.monitor == m && seen.insert(m).second) lanes.push_back(m);
    }
  }
  for (const AlertSpan& s : spans_)
    if (seen.insert(s.monitor).second) lanes.push_back(s.monitor);
  std::size_t longest = 10;
  for (const std::string& l : lanes) longest = std::max(longest, l.size());
  ChartBox box;
  box.left = std::min(320.0, 16.0 + kCharWidth * static_cast<double>(longest));
  const double lane_h = 22.0;
  box.height =
      box.top + box.bottom + lane_h * static_cast<double>(std::max<std::size_t>(1, lanes.size()));
  SvgChart chart(Id("timeline"), "Alert timeline", box);
  ApplyRowAxis(h_, axis_, &chart);
  chart.LinearY(0.0, static_cast<double>(std::max<std::size_t>(1, lanes.size())));
  std::string bars;
  for (std::size_t l = 0; l < lanes.size(); ++l) {
    const double top = chart.plot_top() + lane_h * static_cast<double>(l);
    if (l % 2 == 1) {
      chart.Raw("<rect class=\"lane\" x=\"" + Coord(chart.plot_left()) + "\" y=\"" + Coord(top) +
                    "\" width=\"" + Coord(chart.plot_right() - chart.plot_left()) + "\" height=\"" +
                    Coord(lane_h) + "\"/>",
                true);
    }
    chart.Label(chart.plot_left() - 8, top + lane_h / 2 + 4, lanes[l], "lane-label", "end");
    for (const AlertSpan& s : spans_) {
      if (s.monitor != lanes[l]) continue;
      const double x0 = chart.x()(static_cast<double>(s.from));
      const double x1 = std::max(chart.x()(static_cast<double>(s.to)), x0 + 2.0);
      bars += "<rect class=\"span-bar " + std::string(LevelClass(s.level)) +
              (s.open ? " open" : "") + "\" x=\"" + Coord(x0) + "\" y=\"" + Coord(top + 5) +
              "\" width=\"" + Coord(x1 - x0) + "\" height=\"" + Coord(lane_h - 10) + "\"><title>" +
              H(s.monitor) + ": " + AlertLevelName(s.level) + " from row " +
              std::to_string(s.from) +
              (s.open ? " (still active)" : " to row " + std::to_string(s.to)) + "</title></rect>";
      if (s.open) {
        bars += "<path class=\"open-end " + std::string(LevelClass(s.level)) + "\" d=\"M" +
                Coord(x1) + "," + Coord(top + 3) + " L" + Coord(x1 + 6) + "," +
                Coord(top + lane_h / 2) + " L" + Coord(x1) + "," + Coord(top + lane_h - 3) +
                " Z\"/>";
      }
    }
  }
  chart.Raw(bars, false);
  if (lanes.empty()) {
    chart.Label(0.5 * (chart.plot_left() + chart.plot_right()), chart.plot_top() + 15,
                "no alert transitions recorded", "note", "middle");
  }
  chart.Legend({{LegendItem::Kind::kBlock, "span-bar warn", "warn"},
                {LegendItem::Kind::kBlock, "span-bar crit", "critical"}});
  std::string out = Heading("Alerts");
  out += Figure(FigureNumber() + "Alert timeline", chart.Svg(),
                "Each bar runs from the row an alert was raised to the row it cleared (a raise "
                "from warn to critical starts a new bar); a pointed end marks an alert still "
                "active at the last row.");
  out +=
      "<table class=\"events\"><thead><tr><th>period</th><th>row</th><th>monitor</th>"
      "<th>transition</th><th>level</th><th>statistic</th><th>threshold</th><th>message</th>"
      "</tr></thead><tbody>\n";
  for (const AlertEvent& ev : h_.alerts) {
    out += "<tr class=\"ev " + std::string(ev.raised ? "raised " : "cleared ") +
           LevelClass(ev.level) + "\"><td class=\"nowrap\">" + H(ev.period) +
           "</td><td class=\"num\">" + std::to_string(ev.row) + "</td><td class=\"mon\">" +
           BreakAtDots(H(ev.monitor)) + "</td><td>" + (ev.raised ? "raised" : "cleared") +
           "</td><td><span class=\"lvl-tag " + LevelClass(ev.level) + "\">" +
           AlertLevelName(ev.level) + "</span></td><td class=\"num\">" + Fmt(ev.statistic) +
           "</td><td class=\"num\">" + Fmt(ev.threshold) + "</td><td class=\"msg\">" +
           H(ev.message) + "</td></tr>\n";
  }
  if (h_.alerts.empty()) {
    out += "<tr><td colspan=\"8\" class=\"empty\">No alert transitions recorded.</td></tr>\n";
  }
  out += "</tbody></table>\n";
  return out;
}

// ---------------------------------------------------------------------------------------------
// Coefficients

std::string ModelSection::CoefficientsPart() {
  const std::vector<std::string> vars = ModelVariables(h_);
  const std::string equation =
      options_.equation.empty() ? (vars.empty() ? "" : vars.front()) : options_.equation;
  std::string out = Heading("Coefficients of the equation for " + H(equation));
  if (h_.snapshots.empty()) {
    return out + "<p class=\"lead\">No snapshot recorded yet, so no coefficient paths.</p>\n";
  }
  const Snapshot& last = h_.snapshots.back();
  std::size_t eq = 0;
  while (eq < last.variables.size() && last.variables[eq] != equation) ++eq;
  if (eq == last.variables.size()) {
    return out + "<p class=\"warning\">The snapshots do not name the variable " + H(equation) +
           ".</p>\n";
  }
  ChartBox box;
  box.width = 470;
  box.height = 200;
  box.left = 58;
  const std::size_t k = last.regressors.size();
  const std::size_t m = h_.snapshots.size();
  std::string charts;
  for (std::size_t j = 0; j < k; ++j) {
    std::vector<double> x(m), b(m, kNaN), lo(m, kNaN), hi(m, kNaN);
    for (std::size_t s = 0; s < m; ++s) {
      const Snapshot& snap = h_.snapshots[s];
      x[s] = static_cast<double>(snap.row);
      if (eq < snap.coefficients.size() && j < snap.coefficients[eq].size()) {
        b[s] = snap.coefficients[eq][j];
      }
      if (eq < snap.se.size() && j < snap.se[eq].size() && Finite(b[s]) && Finite(snap.se[eq][j])) {
        lo[s] = b[s] - kZ95 * snap.se[eq][j];
        hi[s] = b[s] + kZ95 * snap.se[eq][j];
      }
    }
    const std::string& name = last.regressors[j];
    SvgChart chart(Id("coef-" + equation + "-" + name),
                   "Coefficient " + name + " in equation " + equation, box);
    ApplyRowAxis(h_, axis_, &chart);
    double y_lo = std::min({0.0, FiniteMin(b), FiniteMin(lo)});
    double y_hi = std::max({0.0, FiniteMax(b), FiniteMax(hi)});
    if (!Finite(y_lo) || !Finite(y_hi)) {
      y_lo = -1.0;
      y_hi = 1.0;
    }
    const double pad = 0.04 * (y_hi - y_lo);
    ApplyValueAxis(&chart, y_lo - pad, y_hi + pad, "coefficient");
    chart.RuleY(0.0, "zero");
    chart.Band(x, lo, hi, "band");
    chart.Line(x, b, "data");
    for (std::size_t s = 0; s < m; ++s) chart.Dot(x[s], b[s], 2.0, "snap-dot");
    std::string cap = "Last: " + Fmt(b[m - 1]) +
                      (Finite(lo[m - 1]) ? " \u00b1 " + Fmt(hi[m - 1] - b[m - 1], 3) : "") + ".";
    charts += Figure(FigureNumber() + H(name), chart.Svg(), cap, "small");
  }
  out += "<p class=\"lead\">The tracking estimate of each regressor's coefficient in the " +
         H(equation) + " equation at every snapshot (" + std::to_string(m) +
         " snapshots), with \u00b1 1.96 SE bands (the model's covariance kind). Choose another "
         "equation with --equation.</p>\n<div class=\"grid2\">" +
         charts + "</div>\n";
  return out;
}

std::string ModelSection::Render() {
  std::string out = "<section class=\"model\" id=\"" + H(prefix_) + "section\">\n" + Header();
  if (h_.rows.empty()) {
    return out +
           "<p class=\"warning\">No estimated rows are recorded for this model yet: "
           "nothing to chart.</p>\n</section>\n";
  }
  out += StatusLine();
  out += StabilityPart();
  out += RestrictionsPart();
  out += SequentialPart();
  out += ConstancyPart();
  out += DiagnosticsPart();
  out += OtherMonitorsPart();
  out += AlertsPart();
  out += CoefficientsPart();
  return out + "</section>\n";
}

// ---------------------------------------------------------------------------------------------
// The document

constexpr const char* kStyle = R"css(
:root{--ink:#1f232b;--muted:#5d636e;--paper:#f4f3ef;--card:#fff;--rule:#d9d6cc;
--est:#1d5b82;--warn:#c27c0e;--crit:#a9322a}
*{box-sizing:border-box}
body{margin:0;background:var(--paper);color:var(--ink);
font:14px/1.45 "DejaVu Sans","Liberation Sans",Arial,sans-serif}
.page{max-width:1040px;margin:0 auto;padding:20px 18px 40px}
header.doc{border-bottom:2px solid var(--ink);padding:6px 0 12px;margin-bottom:18px}
header.doc .kicker{font-size:11px;letter-spacing:.14em;text-transform:uppercase;color:var(--muted)}
header.doc h1{font-size:24px;margin:2px 0 6px;font-weight:600}
header.doc p{margin:2px 0;color:var(--muted)}
nav.toc{font-size:13px;margin-top:8px}
nav.toc a{color:var(--est);margin-right:14px}
section.model{background:var(--card);border:1px solid var(--rule);border-left:5px solid var(--est);
padding:18px 26px 24px;margin:0 0 26px}
.model-head{display:flex;align-items:baseline;gap:14px;flex-wrap:wrap}
.model-head h2{margin:0;font-size:21px}
.model-meta{color:var(--muted);font-size:12px}
dl.facts{display:grid;grid-template-columns:repeat(auto-fill,minmax(210px,1fr));gap:6px 18px;
margin:12px 0;padding:10px 0;border-top:1px solid var(--rule);border-bottom:1px solid var(--rule)}
dl.facts div{min-width:0}
dl.facts dt{font-size:10.5px;text-transform:uppercase;letter-spacing:.08em;color:var(--muted)}
dl.facts dd{margin:0;font-size:13.5px;overflow-wrap:anywhere}
details.spec summary{cursor:pointer;color:var(--est);font-size:13px}
details.spec pre{background:#f7f6f2;border:1px solid var(--rule);padding:10px;font-size:12px;
overflow:auto;font-family:"DejaVu Sans Mono","Liberation Mono",monospace}
.now{margin:12px 0 4px;font-size:13px}
.now-label{color:var(--muted);margin-right:6px}
.chip{display:inline-block;padding:1px 9px;border-radius:10px;font-size:12px;margin:2px 4px 2px 0;
border:1px solid}
.chip.quiet{border-color:var(--rule);color:var(--muted)}
.chip.warn{border-color:var(--warn);color:#7a4d05;background:#fbf1de}
.chip.crit{border-color:var(--crit);color:#fff;background:var(--crit)}
h3{font-size:16px;margin:26px 0 6px;padding-bottom:4px;border-bottom:1px solid var(--rule)}
h3 .part{display:inline-block;min-width:22px;color:var(--muted);font-weight:400}
h4{font-size:13px;margin:0 0 4px;font-weight:600}
figure{margin:14px 0 18px;break-inside:avoid}
figcaption{font-size:12px;color:var(--muted);margin-top:3px;max-width:860px}
p.lead{font-size:12.5px;color:var(--muted);max-width:860px}
p.warning{border-left:3px solid var(--warn);padding:4px 10px;background:#fbf6ea;font-size:13px}
.grid2{display:grid;grid-template-columns:repeat(auto-fill,minmax(440px,1fr));gap:0 22px}
.grid2 figure{margin:8px 0 12px}
.side{display:flex;gap:22px;align-items:flex-start;flex-wrap:wrap}
.square{width:430px;max-width:100%}
svg.chart{display:block;width:100%;height:auto;font-family:inherit;overflow:visible}
.plot-bg{fill:#fff}.frame{fill:none;stroke:#b3b0a6;stroke-width:.8}
.grid{stroke:#ecebe5;stroke-width:1}.axis{stroke:#8c8f96;stroke-width:1}
.tick,.legend,.note{font-size:11px;fill:var(--muted)}.note{font-style:italic}
.axis-title{font-size:11.5px;fill:#3b4049}
.data{fill:none;stroke:var(--est);stroke-width:1.5;stroke-linejoin:round;stroke-linecap:round}
.data.lone{fill:var(--est)}
.band{fill:var(--est);fill-opacity:.17;stroke:none}
.lvl{fill:none;stroke-width:1.3}
.lvl.warn{stroke:var(--warn);stroke-dasharray:7 4}
.lvl.crit{stroke:var(--crit);stroke-width:1.6}
.ref{stroke:#7d828a;stroke-width:1;stroke-dasharray:2 3}
.unit{stroke:var(--ink);stroke-width:1;stroke-dasharray:1 3}
.zero{stroke:#9a9ea5;stroke-width:.8}
.unarmed{fill:#efeee9}
.span-bg{fill-opacity:.13}.span-bg.warn{fill:var(--warn)}.span-bg.crit{fill:var(--crit)}
.span-bar.warn,.open-end.warn{fill:var(--warn)}.span-bar.crit,.open-end.crit{fill:var(--crit)}
.lane{fill:#f6f5f1}.lane-label{font-size:11px;fill:var(--ink)}
.unit-circle{fill:none;stroke:var(--ink);stroke-width:1.1}
.eig-trail{fill:var(--est)}
.eig-last{fill:var(--est);stroke:#fff;stroke-width:1.3}
.snap-dot{fill:var(--est)}
table{border-collapse:collapse;font-size:12.5px}
th{text-align:left;font-weight:600;border-bottom:1.5px solid var(--ink);padding:3px 8px}
td{border-bottom:1px solid #e7e5de;padding:3px 8px;vertical-align:top}
td.num{text-align:right;font-variant-numeric:tabular-nums;white-space:nowrap}
td.nowrap{white-space:nowrap}td.mon{min-width:90px;max-width:210px}
td.msg{min-width:380px}td.empty{color:var(--muted);font-style:italic}
table.eig caption{text-align:left;font-size:12px;color:var(--muted);padding-bottom:4px}
table.events{width:100%;margin-top:6px}
tr.ev.raised.crit td:first-child{box-shadow:inset 3px 0 var(--crit)}
tr.ev.raised.warn td:first-child{box-shadow:inset 3px 0 var(--warn)}
.lvl-tag{font-size:11px;padding:0 6px;border-radius:3px;border:1px solid}
.lvl-tag.warn{color:#7a4d05;border-color:var(--warn)}
.lvl-tag.crit{color:var(--crit);border-color:var(--crit)}
footer.cautions{border-top:2px solid var(--ink);margin-top:10px;padding-top:10px;font-size:12.5px}
footer.cautions h2{font-size:14px;margin:0 0 6px}
footer.cautions ul{margin:0;padding-left:20px}
@media print{
@page{size:A4;margin:13mm}
body{background:#fff;font-size:10pt}
.page{max-width:none;padding:0}
nav.toc{display:none}
section.model{border:none;padding:0;margin:0;break-before:page}
section.model:first-of-type{break-before:auto}
figure,tr,table.eig{break-inside:avoid}
h3,h4{break-after:avoid}
table.events{font-size:8.5pt}
details.spec summary{color:var(--ink)}
.chip.crit{color:var(--crit);background:#fff}
}
)css";

// Opens the spec text before printing (a closed <details> prints its summary only).
constexpr const char* kScript =
    "window.addEventListener('beforeprint',function(){"
    "document.querySelectorAll('details').forEach(function(d){d.open=true;});});";

constexpr const char* kCautions =
    "<footer class=\"cautions\"><h2>Cautions</h2><ul>"
    "<li>This report is statistical evidence about a fitted model, not trading or policy "
    "advice.</li>"
    "<li>Models fail: a vector autoregression describes the rows it was fitted on and can stop "
    "describing the data without any monitor noticing; every alarm level has a chance of false "
    "alarms, and a quiet monitor is no proof that nothing changed.</li>"
    "<li>Validate a model spec by replay on your own history (<code>rimwatch replay</code>) "
    "before acting on its alerts.</li>"
    "<li>Follow your institution's model-risk rules for review, approval and use of any "
    "model and of what it reports.</li></ul></footer>\n";

}  // namespace

std::vector<std::string> ModelVariables(const ModelHistory& history) {
  if (history.spec_parsed) return history.spec.var.variables;
  if (!history.snapshots.empty()) return history.snapshots.back().variables;
  return {};
}

std::string RenderReportPage(const std::vector<ModelHistory>& models,
                             const ReportPageOptions& options) {
  std::string names;
  for (const ModelHistory& h : models) names += (names.empty() ? "" : ", ") + h.model.name;
  std::string out =
      "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
      "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n"
      "<meta name=\"generator\" content=\"rimwatch " +
      H(options.version) + "\">\n<title>rimwatch report: " + H(names) + "</title>\n<style>" +
      kStyle +
      "</style>\n</head>\n<body>\n<div class=\"page\">\n<header class=\"doc\">"
      "<div class=\"kicker\">rimwatch \u00b7 monitoring report</div><h1>" +
      H(names) + "</h1><p>Log: <code>" + H(options.db_path) + "</code> \u00b7 " +
      std::to_string(models.size()) + (models.size() == 1 ? " model" : " models") +
      " \u00b7 rimwatch " + H(options.version) +
      "</p>"
      "<p>Rows are the model's estimation rows; every period label comes from the log. Colours: "
      "blue is the estimate, amber the warn level, red the critical level.</p>";
  if (models.size() > 1) {
    out += "<nav class=\"toc\">";
    for (std::size_t i = 0; i < models.size(); ++i) {
      out +=
          "<a href=\"#m" + std::to_string(i + 1) + "-section\">" + H(models[i].model.name) + "</a>";
    }
    out += "</nav>";
  }
  out += "</header>\n";
  for (std::size_t i = 0; i < models.size(); ++i) {
    ModelSection section(models[i], static_cast<int>(i) + 1, options);
    out += section.Render();
  }
  out += kCautions;
  out += "</div>\n<script>" + std::string(kScript) + "</script>\n</body>\n</html>\n";
  return out;
}

}  // namespace rimwatch::cli
