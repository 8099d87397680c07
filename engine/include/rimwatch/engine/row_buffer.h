// RowBuffer: a fixed-capacity ring of the most recent estimation rows z_t = [x_t; y_t] with their
// estimation index t. Oldest rows fall out when full. Storage is one (k+n) x capacity matrix.
//
// Thread safety: none; one owner.
#pragma once

#include <Eigen/Core>
#include <cstdint>
#include <vector>

namespace rimwatch {

class RowBuffer {
 public:
  RowBuffer(int width, std::size_t capacity)
      : rows_(width, static_cast<Eigen::Index>(capacity)), index_(capacity, 0) {}

  std::size_t capacity() const { return index_.size(); }
  std::size_t size() const { return size_; }
  bool full() const { return size_ == capacity(); }
  // Append; when full the oldest row is overwritten.
  void Push(const Eigen::Ref<const Eigen::VectorXd>& z, std::int64_t t) {
    std::size_t slot = (start_ + size_) % capacity();
    if (full()) {
      slot = start_;
      start_ = (start_ + 1) % capacity();
    } else {
      ++size_;
    }
    rows_.col(static_cast<Eigen::Index>(slot)) = z;
    index_[slot] = t;
  }
  void PopOldest() {
    start_ = (start_ + 1) % capacity();
    --size_;
  }
  void Clear() { start_ = size_ = 0; }
  // i = 0 is the oldest buffered row.
  Eigen::Ref<const Eigen::VectorXd> Row(std::size_t i) const {
    return rows_.col(static_cast<Eigen::Index>((start_ + i) % capacity()));
  }
  std::int64_t Index(std::size_t i) const { return index_[(start_ + i) % capacity()]; }
  // Copy the rows, oldest first, into a (k+n) x size() matrix.
  Eigen::MatrixXd Ordered() const {
    Eigen::MatrixXd out(rows_.rows(), static_cast<Eigen::Index>(size_));
    for (std::size_t i = 0; i < size_; ++i) out.col(static_cast<Eigen::Index>(i)) = Row(i);
    return out;
  }

 private:
  Eigen::MatrixXd rows_;
  std::vector<std::int64_t> index_;
  std::size_t start_ = 0;
  std::size_t size_ = 0;
};

}  // namespace rimwatch
