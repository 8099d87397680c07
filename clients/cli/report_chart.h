// Charts of `rimwatch report`: inline SVG written as text, no scripts, no external resources.
//
// Axis ticks sit at "nice" numbers, 1, 2 or 5 times a power of ten (the labelling scheme of
// Heckbert 1990, "Nice numbers for graph labels", Graphics Gems I; common practice). NiceTicks
// picks the smallest such step that leaves at most max_ticks ticks inside [lo, hi]; a y axis
// widens its domain to the outer ticks (loose labelling). A log axis ticks at powers of ten,
// every d-th decade when there are too many.
//
// SvgChart draws into a fixed viewBox (width x height user units) with a plot rectangle inside
// the margins; everything drawn in data coordinates is clipped to it. A line breaks at a NaN;
// a long line keeps, per pixel column, its first, lowest, highest and last point (in order), so
// the drawn shape equals the full-resolution one at the chart's size while the text stays small.
// Styling is by CSS class (the page's style sheet), so print rules can restyle every chart.
//
// Thread safety: none needed (values; no shared state).
#pragma once

#include <cstdint>
#include <string>
#include <vector>

namespace rimwatch::cli {

// XML text escaping for element content and attribute values (& < > " ').
std::string EscapeXml(const std::string& text);

struct Ticks {
  double step = 0.0;
  int decimals = 0;  // digits after the point that label every tick exactly
  std::vector<double> values;
};

// Ticks at multiples of the smallest step in {1, 2, 5} x 10^e with at most max_ticks (>= 2)
// multiples in [lo, hi]. lo > hi are swapped; a zero-width or non-finite range is widened to a
// unit-ish range around its value, so the result always has at least one tick.
Ticks NiceTicks(double lo, double hi, int max_ticks);
// The same step, with the domain widened to [floor(lo / step), ceil(hi / step)] x step and the
// ticks of that domain (loose labelling, for value axes). *lo and *hi are updated. At least 3
// ticks are allowed (a range around zero needs -step, 0, step).
Ticks LooseTicks(double* lo, double* hi, int max_ticks);
// A tick's text: fixed with `decimals` digits, "-0" printed as "0"; %g above 1e6 in magnitude.
std::string FormatTick(double value, int decimals);
// Powers of ten from 10^floor(log10 lo) to 10^ceil(log10 hi), every d-th decade so that at most
// max_ticks remain. REQUIRES 0 < lo <= hi.
std::vector<double> DecadeTicks(double lo, double hi, int max_ticks);

// A linear or base-10 logarithmic map from a data domain onto a pixel range.
class AxisScale {
 public:
  AxisScale() = default;
  static AxisScale Linear(double lo, double hi, double pixel_lo, double pixel_hi);
  static AxisScale Log10(double lo, double hi, double pixel_lo, double pixel_hi);  // 0 < lo < hi
  double operator()(double v) const;
  double lo() const { return lo_; }
  double hi() const { return hi_; }
  bool log() const { return log_; }

 private:
  double lo_ = 0.0, hi_ = 1.0, p0_ = 0.0, p1_ = 1.0;
  bool log_ = false;
};

struct ChartBox {
  double width = 960.0;  // viewBox, user units (~px at 100%)
  double height = 250.0;
  double left = 66.0;  // margins around the plot rectangle
  double right = 18.0;
  double top = 30.0;  // room for the legend
  double bottom = 46.0;
};

struct LegendItem {
  enum class Kind { kLine, kBand, kDot, kBlock };
  Kind kind = Kind::kLine;
  std::string css_class;
  std::string label;
};

class SvgChart {
 public:
  // id: the svg element's id (also prefixes the clip path); label: its accessible title.
  SvgChart(std::string id, std::string label, ChartBox box);

  double plot_left() const { return box_.left; }
  double plot_right() const { return box_.width - box_.right; }
  double plot_top() const { return box_.top; }
  double plot_bottom() const { return box_.height - box_.bottom; }
  const ChartBox& box() const { return box_; }

  void SetX(const AxisScale& x) { x_ = x; }
  void SetY(const AxisScale& y) { y_ = y; }
  // Scales onto the plot rectangle (y grows upwards).
  void LinearX(double lo, double hi);
  void LinearY(double lo, double hi);
  void LogY(double lo, double hi);
  const AxisScale& x() const { return x_; }
  const AxisScale& y() const { return y_; }

  // A vertical band over the plot's full height between data x0 and x1 (e.g. an alert span).
  void ShadeX(double x0, double x1, const std::string& css_class);
  // Horizontal grid lines and labels at the values; title rotated along the axis.
  void YAxis(const std::vector<double>& values, const std::vector<std::string>& labels,
             const std::string& title);
  // Vertical grid lines and labels at the values; title centred below.
  void XAxis(const std::vector<double>& values, const std::vector<std::string>& labels,
             const std::string& title);
  // A polyline through (x[i], y[i]); a NaN in either breaks it. Class "data" marks a data path.
  // Returns the number of points drawn (after decimation).
  std::size_t Line(const std::vector<double>& x, const std::vector<double>& y,
                   const std::string& css_class);
  // Filled polygons between lo[i] and hi[i]; a NaN breaks the band.
  void Band(const std::vector<double>& x, const std::vector<double>& lo,
            const std::vector<double>& hi, const std::string& css_class);
  // A horizontal rule at data y over the plot width.
  void RuleY(double y, const std::string& css_class);
  // A circle at data (x, y) with radius in user units; opacity in (0, 1].
  void Dot(double x, double y, double radius, const std::string& css_class, double opacity = 1.0);
  // A circle of data radius r around the data origin (complex-plane charts; needs equal scales).
  void DataCircle(double r, const std::string& css_class);
  // A text at user-unit (not data) position; anchor: start | middle | end.
  void Label(double ux, double uy, const std::string& text, const std::string& css_class,
             const std::string& anchor = "start");
  // Raw SVG appended inside the clipped data group or, with clipped = false, on top.
  void Raw(const std::string& svg, bool clipped);
  // A row of swatches and labels along the top margin, right-aligned.
  void Legend(const std::vector<LegendItem>& items);

  // The finished <svg> element.
  std::string Svg() const;

 private:
  std::string id_;
  std::string label_;
  ChartBox box_;
  AxisScale x_, y_;
  std::string back_;  // under the data (shading, grid)
  std::string data_;  // clipped to the plot rectangle
  std::string front_;
};

// Number formatting for SVG coordinates and HTML tables.
std::string Coord(double v);                    // one decimal, no trailing ".0"
std::string FormatValue(double v, int digits);  // %.{digits}g; "n/a" for NaN
}  // namespace rimwatch::cli
