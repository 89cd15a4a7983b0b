#include "aerosect/integrate/sink.hpp"

#include "aerosect/error.hpp"

namespace aerosect {

void MemorySink::begin(const Channel& /*time_channel*/, const std::vector<Channel>& channels,
                       const RunMetadata& meta) {
  channels_ = channels;
  meta_ = meta;
  row_width_ = 0;
  for (const auto& c : channels_) row_width_ += c.width;
  time_.clear();
  data_.clear();
}

void MemorySink::append(double time, std::span<const double> row) {
  AEROSECT_CHECK(static_cast<int>(row.size()) == row_width_);
  time_.push_back(time);
  data_.insert(data_.end(), row.begin(), row.end());
}

std::vector<double> MemorySink::column(const std::string& name, int component) const {
  int offset = 0;
  for (const auto& c : channels_) {
    if (c.name == name) {
      AEROSECT_CHECK(component >= 0 && component < c.width);
      std::vector<double> col(time_.size());
      for (std::size_t i = 0; i < time_.size(); ++i)
        col[i] = data_[i * row_width_ + offset + component];
      return col;
    }
    offset += c.width;
  }
  throw InternalError(__FILE__, __LINE__, "no channel named " + name);
}

}  // namespace aerosect
