// RowTransformer: applies each variable's transform (level, diff, logdiff) to raw model rows.
//
// diff and logdiff need the previous raw row, so the first raw row yields no model row.
// logdiff needs strictly positive values: a value <= 0 is refused with kInvalidArgument naming
// the variable, and the state is unchanged (as for non-finite values).
#pragma once

#include <Eigen/Core>
#include <string>
#include <vector>

#include "rimwatch/engine/model_spec.h"
#include "rimwatch/engine/status.h"

namespace rimwatch {

class RowTransformer {
 public:
  RowTransformer(std::vector<std::string> names, std::vector<Transform> transforms);

  // raw: n values. On OK, *ready says whether *out holds a model row.
  Status Apply(const Eigen::Ref<const Eigen::VectorXd>& raw, Eigen::VectorXd* out, bool* ready);
  bool needs_previous() const { return needs_previous_; }

 private:
  std::vector<std::string> names_;
  std::vector<Transform> transforms_;
  bool needs_previous_ = false;
  bool has_previous_ = false;
  Eigen::VectorXd previous_;
};

}  // namespace rimwatch
