// SVG charts of `rimwatch report` (report_chart.h).
#include "report_chart.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <limits>

namespace rimwatch::cli {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
// Pixel coordinates are clamped to this magnitude so a far off-scale value still writes a valid
// (clipped) path.
constexpr double kPixelLimit = 1.0e5;

double ClampPixel(double p) { return std::clamp(p, -kPixelLimit, kPixelLimit); }

// The range NiceTicks works on: ordered, finite and of positive width.
void UsableRange(double* lo, double* hi) {
  if (!std::isfinite(*lo) || !std::isfinite(*hi)) {
    *lo = std::isfinite(*lo) ? *lo : (std::isfinite(*hi) ? *hi : 0.0);
    *hi = *lo;
  }
  if (*lo > *hi) std::swap(*lo, *hi);
  if (*hi - *lo <= 1e-12 * std::max(std::fabs(*lo), std::fabs(*hi))) {
    const double half = *lo == 0.0 ? 1.0 : 0.5 * std::fabs(*lo);
    *lo -= half;
    *hi += half;
  }
}

// Steps m x 10^e, m in {1, 2, 5}, in increasing order, starting below `at_least`.
template <typename Accept>
Ticks FirstNiceStep(double lo, double hi, int max_ticks, Accept accept) {
  max_ticks = std::max(max_ticks, 2);
  const double rough = (hi - lo) / max_ticks;
  int e = static_cast<int>(std::floor(std::log10(rough))) - 1;
  // Terminates: a step of at least hi - lo fits max_ticks >= 2 (>= 3 loose), e.g. within the
  // first two decades above `rough`.
  for (;; ++e) {
    for (const int m : {1, 2, 5}) {
      const double step = m * std::pow(10.0, e);
      const double first = std::ceil(lo / step - 1e-9);
      const double last = std::floor(hi / step + 1e-9);
      if (!accept(step, first, last)) continue;
      Ticks t;
      t.step = step;
      t.decimals = std::max(0, -e);
      return t;
    }
  }
}

std::string Number(double v, const char* format) {
  char buf[64];
  std::snprintf(buf, sizeof buf, format, v);
  return buf;
}

}  // namespace

std::string EscapeXml(const std::string& text) {
  std::string out;
  out.reserve(text.size());
  for (const char c : text) {
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
      case '\'':
        out += "&#39;";
        break;
      default:
        out += c;
    }
  }
  return out;
}

Ticks NiceTicks(double lo, double hi, int max_ticks) {
  UsableRange(&lo, &hi);
  Ticks t = FirstNiceStep(lo, hi, max_ticks, [&](double, double first, double last) {
    return last - first + 1 <= std::max(max_ticks, 2);
  });
  const double first = std::ceil(lo / t.step - 1e-9);
  const double last = std::floor(hi / t.step + 1e-9);
  for (double k = first; k <= last; ++k) t.values.push_back(k * t.step);
  return t;
}

Ticks LooseTicks(double* lo, double* hi, int max_ticks) {
  UsableRange(lo, hi);
  // A range around zero needs three loose ticks (-s, 0, s) whatever the step.
  max_ticks = std::max(max_ticks, 3);
  Ticks t = FirstNiceStep(*lo, *hi, max_ticks, [&](double step, double, double) {
    const double first = std::floor(*lo / step + 1e-9);
    const double last = std::ceil(*hi / step - 1e-9);
    return last - first + 1 <= max_ticks;
  });
  const double first = std::floor(*lo / t.step + 1e-9);
  const double last = std::ceil(*hi / t.step - 1e-9);
  *lo = first * t.step;
  *hi = last * t.step;
  for (double k = first; k <= last; ++k) t.values.push_back(k * t.step);
  return t;
}

std::string FormatTick(double value, int decimals) {
  if (std::fabs(value) >= 1e6) return Number(value, "%g");
  char buf[64];
  std::snprintf(buf, sizeof buf, "%.*f", std::clamp(decimals, 0, 12), value);
  std::string s = buf;
  // "-0", "-0.00": a rounding of zero.
  if (s[0] == '-' && s.find_first_not_of("-0.") == std::string::npos) s.erase(0, 1);
  return s;
}

std::vector<double> DecadeTicks(double lo, double hi, int max_ticks) {
  const int e0 = static_cast<int>(std::floor(std::log10(lo) + 1e-9));
  const int e1 = static_cast<int>(std::ceil(std::log10(hi) - 1e-9));
  const int decades = e1 - e0 + 1;
  const int every = std::max(1, (decades + std::max(max_ticks, 2) - 1) / std::max(max_ticks, 2));
  std::vector<double> out;
  for (int e = e1; e >= e0; e -= every) out.insert(out.begin(), std::pow(10.0, e));
  return out;
}

AxisScale AxisScale::Linear(double lo, double hi, double pixel_lo, double pixel_hi) {
  AxisScale s;
  UsableRange(&lo, &hi);
  s.lo_ = lo;
  s.hi_ = hi;
  s.p0_ = pixel_lo;
  s.p1_ = pixel_hi;
  return s;
}

AxisScale AxisScale::Log10(double lo, double hi, double pixel_lo, double pixel_hi) {
  AxisScale s;
  s.lo_ = lo;
  s.hi_ = hi > lo ? hi : lo * 10.0;
  s.p0_ = pixel_lo;
  s.p1_ = pixel_hi;
  s.log_ = true;
  return s;
}

double AxisScale::operator()(double v) const {
  if (!std::isfinite(v)) return kNaN;
  double t = 0.0;
  if (log_) {
    if (v <= 0.0) return kNaN;
    t = (std::log10(v) - std::log10(lo_)) / (std::log10(hi_) - std::log10(lo_));
  } else {
    t = (v - lo_) / (hi_ - lo_);
  }
  return ClampPixel(p0_ + t * (p1_ - p0_));
}

std::string Coord(double v) {
  std::string s = Number(v, "%.1f");
  if (s.size() > 2 && s.compare(s.size() - 2, 2, ".0") == 0) s.resize(s.size() - 2);
  if (s == "-0") s = "0";
  return s;
}

std::string FormatValue(double v, int digits) {
  if (!std::isfinite(v)) return std::isnan(v) ? "n/a" : (v > 0 ? "inf" : "-inf");
  char buf[64];
  std::snprintf(buf, sizeof buf, "%.*g", digits, v);
  return buf;
}

SvgChart::SvgChart(std::string id, std::string label, ChartBox box)
    : id_(std::move(id)), label_(std::move(label)), box_(box) {
  LinearX(0.0, 1.0);
  LinearY(0.0, 1.0);
}

void SvgChart::LinearX(double lo, double hi) {
  x_ = AxisScale::Linear(lo, hi, plot_left(), plot_right());
}
void SvgChart::LinearY(double lo, double hi) {
  y_ = AxisScale::Linear(lo, hi, plot_bottom(), plot_top());
}
void SvgChart::LogY(double lo, double hi) {
  y_ = AxisScale::Log10(lo, hi, plot_bottom(), plot_top());
}

void SvgChart::ShadeX(double x0, double x1, const std::string& css_class) {
  const double a = std::clamp(x_(x0), plot_left(), plot_right());
  const double b = std::clamp(x_(x1), plot_left(), plot_right());
  if (!std::isfinite(a) || !std::isfinite(b)) return;
  back_ += "<rect class=\"" + css_class + "\" x=\"" + Coord(std::min(a, b)) + "\" y=\"" +
           Coord(plot_top()) + "\" width=\"" + Coord(std::max(std::fabs(b - a), 1.0)) +
           "\" height=\"" + Coord(plot_bottom() - plot_top()) + "\"/>";
}

void SvgChart::YAxis(const std::vector<double>& values, const std::vector<std::string>& labels,
                     const std::string& title) {
  for (std::size_t i = 0; i < values.size(); ++i) {
    const double py = y_(values[i]);
    if (!std::isfinite(py) || py < plot_top() - 0.5 || py > plot_bottom() + 0.5) continue;
    back_ += "<line class=\"grid\" x1=\"" + Coord(plot_left()) + "\" x2=\"" + Coord(plot_right()) +
             "\" y1=\"" + Coord(py) + "\" y2=\"" + Coord(py) + "\"/>";
    if (i < labels.size()) {
      front_ += "<text class=\"tick\" x=\"" + Coord(plot_left() - 6) + "\" y=\"" + Coord(py + 4) +
                "\" text-anchor=\"end\">" + labels[i] + "</text>";
    }
  }
  if (!title.empty()) {
    const double mid = 0.5 * (plot_top() + plot_bottom());
    front_ += "<text class=\"axis-title\" text-anchor=\"middle\" transform=\"translate(13," +
              Coord(mid) + ") rotate(-90)\">" + EscapeXml(title) + "</text>";
  }
}

void SvgChart::XAxis(const std::vector<double>& values, const std::vector<std::string>& labels,
                     const std::string& title) {
  for (std::size_t i = 0; i < values.size(); ++i) {
    const double px = x_(values[i]);
    if (!std::isfinite(px) || px < plot_left() - 0.5 || px > plot_right() + 0.5) continue;
    back_ += "<line class=\"grid\" x1=\"" + Coord(px) + "\" x2=\"" + Coord(px) + "\" y1=\"" +
             Coord(plot_top()) + "\" y2=\"" + Coord(plot_bottom()) + "\"/>";
    front_ += "<line class=\"axis\" x1=\"" + Coord(px) + "\" x2=\"" + Coord(px) + "\" y1=\"" +
              Coord(plot_bottom()) + "\" y2=\"" + Coord(plot_bottom() + 4) + "\"/>";
    if (i < labels.size()) {
      front_ += "<text class=\"tick\" x=\"" + Coord(px) + "\" y=\"" + Coord(plot_bottom() + 16) +
                "\" text-anchor=\"middle\">" + labels[i] + "</text>";
    }
  }
  if (!title.empty()) {
    front_ += "<text class=\"axis-title\" x=\"" + Coord(0.5 * (plot_left() + plot_right())) +
              "\" y=\"" + Coord(box_.height - 6) + "\" text-anchor=\"middle\">" + EscapeXml(title) +
              "</text>";
  }
}

std::size_t SvgChart::Line(const std::vector<double>& x, const std::vector<double>& y,
                           const std::string& css_class) {
  const std::size_t n = std::min(x.size(), y.size());
  std::string d;
  std::size_t drawn = 0;
  bool open = false;  // a sub-path is open
  // Per pixel column: first, lowest, highest, last point, emitted in the order they came.
  long column = std::numeric_limits<long>::min();
  std::size_t first = 0, low = 0, high = 0, last = 0;
  std::vector<double> px(n), py(n);
  auto flush = [&]() {
    if (column == std::numeric_limits<long>::min()) return;
    std::size_t keep[4] = {first, low, high, last};
    std::sort(keep, keep + 4);
    const std::size_t* end = std::unique(keep, keep + 4);
    for (const std::size_t* k = keep; k != end; ++k) {
      d += open ? " L" : (d.empty() ? "M" : " M");
      d += Coord(px[*k]) + "," + Coord(py[*k]);
      open = true;
      ++drawn;
    }
    column = std::numeric_limits<long>::min();
  };
  for (std::size_t i = 0; i < n; ++i) {
    px[i] = x_(x[i]);
    py[i] = y_(y[i]);
    if (!std::isfinite(px[i]) || !std::isfinite(py[i])) {
      flush();
      open = false;
      continue;
    }
    const long c = static_cast<long>(std::floor(px[i]));
    if (c != column) {
      flush();
      column = c;
      first = low = high = last = i;
    } else {
      last = i;
      if (py[i] > py[low]) low = i;  // pixel y grows downwards
      if (py[i] < py[high]) high = i;
    }
  }
  flush();
  if (drawn == 0) return 0;
  // A lone point would be invisible as a path; it gets a dot.
  if (drawn == 1) {
    for (std::size_t i = 0; i < n; ++i) {
      if (std::isfinite(px[i]) && std::isfinite(py[i])) {
        data_ += "<circle class=\"" + css_class + " lone\" cx=\"" + Coord(px[i]) + "\" cy=\"" +
                 Coord(py[i]) + "\" r=\"2.5\"/>";
        break;
      }
    }
  }
  data_ += "<path class=\"" + css_class + "\" d=\"" + d + "\"/>";
  return drawn;
}

void SvgChart::Band(const std::vector<double>& x, const std::vector<double>& lo,
                    const std::vector<double>& hi, const std::string& css_class) {
  const std::size_t n = std::min({x.size(), lo.size(), hi.size()});
  // Runs of finite points, each reduced to one point per pixel column (widest extent).
  struct Column {
    double x, top, bottom;
  };
  std::vector<Column> run;
  std::string d;
  auto emit = [&]() {
    if (run.size() >= 2) {
      d += "M" + Coord(run[0].x) + "," + Coord(run[0].top);
      for (std::size_t i = 1; i < run.size(); ++i)
        d += " L" + Coord(run[i].x) + "," + Coord(run[i].top);
      for (std::size_t i = run.size(); i-- > 0;)
        d += " L" + Coord(run[i].x) + "," + Coord(run[i].bottom);
      d += " Z";
    }
    run.clear();
  };
  for (std::size_t i = 0; i < n; ++i) {
    const double px = x_(x[i]), top = y_(hi[i]), bottom = y_(lo[i]);
    if (!std::isfinite(px) || !std::isfinite(top) || !std::isfinite(bottom)) {
      emit();
      continue;
    }
    if (!run.empty() && std::floor(run.back().x) == std::floor(px)) {
      run.back().top = std::min(run.back().top, top);
      run.back().bottom = std::max(run.back().bottom, bottom);
    } else {
      run.push_back(Column{px, top, bottom});
    }
  }
  emit();
  if (!d.empty()) data_ += "<path class=\"" + css_class + "\" d=\"" + d + "\"/>";
}

void SvgChart::RuleY(double y, const std::string& css_class) {
  const double py = y_(y);
  if (!std::isfinite(py)) return;
  data_ += "<line class=\"" + css_class + "\" x1=\"" + Coord(plot_left()) + "\" x2=\"" +
           Coord(plot_right()) + "\" y1=\"" + Coord(py) + "\" y2=\"" + Coord(py) + "\"/>";
}

void SvgChart::Dot(double x, double y, double radius, const std::string& css_class,
                   double opacity) {
  const double px = x_(x), py = y_(y);
  if (!std::isfinite(px) || !std::isfinite(py)) return;
  data_ += "<circle class=\"" + css_class + "\" cx=\"" + Coord(px) + "\" cy=\"" + Coord(py) +
           "\" r=\"" + Coord(radius) + "\"";
  if (opacity < 1.0) data_ += " opacity=\"" + Number(opacity, "%.2f") + "\"";
  data_ += "/>";
}

void SvgChart::DataCircle(double r, const std::string& css_class) {
  const double cx = x_(0.0), cy = y_(0.0);
  const double rx = std::fabs(x_(r) - cx);
  data_ += "<circle class=\"" + css_class + "\" cx=\"" + Coord(cx) + "\" cy=\"" + Coord(cy) +
           "\" r=\"" + Coord(rx) + "\"/>";
}

void SvgChart::Label(double ux, double uy, const std::string& text, const std::string& css_class,
                     const std::string& anchor) {
  front_ += "<text class=\"" + css_class + "\" x=\"" + Coord(ux) + "\" y=\"" + Coord(uy) +
            "\" text-anchor=\"" + anchor + "\">" + EscapeXml(text) + "</text>";
}

void SvgChart::Raw(const std::string& svg, bool clipped) { (clipped ? data_ : front_) += svg; }

void SvgChart::Legend(const std::vector<LegendItem>& items) {
  // Laid out from the right edge leftwards; text width estimated at 6.2 units per character of
  // the 11-unit legend font.
  double right = plot_right();
  const double y = plot_top() - 12;
  std::string out;
  for (auto it = items.rbegin(); it != items.rend(); ++it) {
    const double text_w = 6.2 * static_cast<double>(it->label.size());
    const double x_text = right - text_w;
    const double x_sw = x_text - 26;
    out += "<text class=\"legend\" x=\"" + Coord(x_text) + "\" y=\"" + Coord(y + 4) + "\">" +
           EscapeXml(it->label) + "</text>";
    switch (it->kind) {
      case LegendItem::Kind::kLine:
        out += "<line class=\"" + it->css_class + "\" x1=\"" + Coord(x_sw) + "\" x2=\"" +
               Coord(x_sw + 20) + "\" y1=\"" + Coord(y) + "\" y2=\"" + Coord(y) + "\"/>";
        break;
      case LegendItem::Kind::kBand:
      case LegendItem::Kind::kBlock:
        out += "<rect class=\"" + it->css_class + "\" x=\"" + Coord(x_sw) + "\" y=\"" +
               Coord(y - 5) + "\" width=\"20\" height=\"10\"/>";
        break;
      case LegendItem::Kind::kDot:
        out += "<circle class=\"" + it->css_class + "\" cx=\"" + Coord(x_sw + 10) + "\" cy=\"" +
               Coord(y) + "\" r=\"3.5\"/>";
        break;
    }
    right = x_sw - 16;
  }
  front_ += "<g class=\"legend-row\">" + out + "</g>";
}

std::string SvgChart::Svg() const {
  const std::string w = Coord(plot_right() - plot_left());
  const std::string h = Coord(plot_bottom() - plot_top());
  const std::string rect = "x=\"" + Coord(plot_left()) + "\" y=\"" + Coord(plot_top()) +
                           "\" width=\"" + w + "\" height=\"" + h + "\"";
  std::string s = "<svg xmlns=\"http://www.w3.org/2000/svg\" id=\"" + EscapeXml(id_) +
                  "\" class=\"chart\" viewBox=\"0 0 " + Coord(box_.width) + " " +
                  Coord(box_.height) + "\" role=\"img\" aria-labelledby=\"" + EscapeXml(id_) +
                  "-t\">";
  s += "<title id=\"" + EscapeXml(id_) + "-t\">" + EscapeXml(label_) + "</title>";
  s += "<defs><clipPath id=\"" + EscapeXml(id_) + "-clip\"><rect " + rect + "/></clipPath></defs>";
  s += "<rect class=\"plot-bg\" " + rect + "/>";
  s += back_;
  s += "<g clip-path=\"url(#" + EscapeXml(id_) + "-clip)\">" + data_ + "</g>";
  s += "<rect class=\"frame\" " + rect + "/>";
  s += front_;
  s += "</svg>";
  return s;
}

}  // namespace rimwatch::cli
