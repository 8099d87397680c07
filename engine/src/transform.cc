#include "rimwatch/engine/transform.h"

#include <cmath>
#include <sstream>

namespace rimwatch {

RowTransformer::RowTransformer(std::vector<std::string> names, std::vector<Transform> transforms)
    : names_(std::move(names)), transforms_(std::move(transforms)) {
  for (Transform t : transforms_) needs_previous_ |= t != Transform::kLevel;
}

Status RowTransformer::Apply(const Eigen::Ref<const Eigen::VectorXd>& raw, Eigen::VectorXd* out,
                             bool* ready) {
  const Eigen::Index n = static_cast<Eigen::Index>(transforms_.size());
  *ready = false;
  if (raw.size() != n) return Status::InvalidArgument("row has the wrong number of values");
  for (Eigen::Index i = 0; i < n; ++i) {
    // The message stream only on a refusal: building one per value costs more than the row.
    if (!std::isfinite(raw[i])) {
      std::ostringstream msg;
      msg << "value of '" << names_[i] << "' is " << raw[i] << "; values must be finite";
      return Status::NonFinite(msg.str());
    }
    if (transforms_[i] == Transform::kLogDiff && !(raw[i] > 0.0)) {
      std::ostringstream msg;
      msg << "value of '" << names_[i] << "' is " << raw[i]
          << "; transform logdiff needs values > 0";
      return Status::InvalidArgument(msg.str());
    }
  }
  if (needs_previous_ && !has_previous_) {
    previous_ = raw;
    has_previous_ = true;
    return Status::Ok();
  }
  out->resize(n);
  for (Eigen::Index i = 0; i < n; ++i) {
    switch (transforms_[i]) {
      case Transform::kLevel:
        (*out)[i] = raw[i];
        break;
      case Transform::kDiff:
        (*out)[i] = raw[i] - previous_[i];
        break;
      case Transform::kLogDiff:
        (*out)[i] = std::log(raw[i]) - std::log(previous_[i]);
        break;
    }
  }
  previous_ = raw;
  *ready = true;
  return Status::Ok();
}

}  // namespace rimwatch
