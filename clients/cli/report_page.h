// The HTML document of `rimwatch report`: one self-contained file (inline CSS and SVG, one tiny
// inline script that opens the collapsed spec text for printing; no network, no external fonts,
// scripts or images), readable on screen and on paper (light background, print style sheet).
//
// Per model: a header (name, variables, lags, window, rows, first and last period, the spec text
// in a collapsible block), then the charts, every one an <svg> whose id starts with "m<i>-"
// (i = 1-based position of the model in the report):
//   m<i>-rho                          spectral radius per row, its 95% band (rho +- 1.96 SE where
//                                     the SE exists), the warn and critical levels, unit line
//   m<i>-eigen                        companion eigenvalues of the last snapshot in the complex
//                                     plane, earlier snapshots as a fading trail, unit circle
//   m<i>-restriction.<name>-pvalue    rolling robust Wald p-value (log scale)
//   m<i>-<monitor>                    every other monitor's statistic against its warn and
//                                     critical levels (restriction.<name> scans, cusum,
//                                     volatility, constancy.*, diagnostics.*, ...)
//   m<i>-timeline                     raised-to-cleared spans per monitor, coloured by level,
//                                     followed by the table of every alert transition
//   m<i>-coef-<equation>-<regressor>  the equation's coefficient paths over the snapshots with
//                                     +-1.96 SE bands
// Data lines carry the class "data"; alert spans of the timeline the class "span-bar"; rows of the
// event table the class "ev". A footer states the cautions.
//
// Thread safety: pure function of its arguments.
#pragma once

#include <string>
#include <vector>

#include "report_history.h"

namespace rimwatch::cli {

struct ReportPageOptions {
  std::string db_path;   // shown in the header
  std::string equation;  // coefficient paths of this variable's equation; empty = the first
  std::string version;   // rimwatch version, shown in the header
};

// REQUIRES: every model with rows has options.equation among its variables when it is set (the
// command checks this before calling).
std::string RenderReportPage(const std::vector<ModelHistory>& models,
                             const ReportPageOptions& options);

// The variables of a logged model: the parsed spec's, else those of its last snapshot.
std::vector<std::string> ModelVariables(const ModelHistory& history);

}  // namespace rimwatch::cli
