#pragma once
// Where time histories go. An analysis describes its channels once, then
// appends one row per sample; the sink decides where the rows end up (an
// HDF5 file, memory for a test, nothing). Sinks never see the model.

#include <cstdint>
#include <span>
#include <string>
#include <utility>
#include <vector>

namespace aerosect {

// One recorded quantity. width > 1 makes a 2-D dataset (time x width) whose
// second axis is labelled by component_names.
struct Channel {
  std::string name;       // dataset name, e.g. "pitch"
  std::string units;      // UDUNITS string (CF convention), e.g. "rad", "m s-1"
  std::string long_name;  // CF long_name, e.g. "pitch angle, nose up positive"
  int width = 1;
  std::vector<std::string> component_names;  // size width when width > 1
  std::string component_axis;                // name of the second axis, e.g. "wagner_pole"
};

// A named scalar describing the run (a resolved case parameter).
struct ParameterRecord {
  std::string group;      // e.g. "si", "nondimensional"
  std::string name;       // e.g. "semichord"
  double value = 0;
  std::string units;      // UDUNITS, "1" for dimensionless
  std::string long_name;
};

struct RunMetadata {
  std::string file_kind;  // "simulation" (HDF5 root attribute aerosect_file_kind)
  std::string title;
  std::vector<std::pair<std::string, std::string>> text_attributes;  // root attributes
  std::vector<ParameterRecord> parameters;
  // Rows the run appends if it runs to its end, when known before it starts
  // (fixed-rate samples); 0 when not known (a sample at every step). A sink
  // may size its buffers from it (a 3-sample run need not reserve room for
  // 32768 rows) but must take any number of rows.
  std::int64_t expected_rows = 0;
};

// A number describing a run, with its UDUNITS units ("1" when dimensionless).
struct OutcomeNumber {
  std::string name;   // e.g. "end_time", "pitch_max"
  double value = 0;
  std::string units;  // e.g. "s", "rad"
};

// What is known when a run ends.
struct RunOutcome {
  bool completed = true;        // false when stopped by an error or interruption
  std::string status;           // "completed", "cancelled", "numerical-error: ..."
  std::int64_t samples = 0;
  std::vector<std::pair<std::string, std::int64_t>> counts;  // e.g. {"steps", 1234}
  std::vector<OutcomeNumber> numbers;                        // e.g. {"end_time", 3.0, "s"}
};

class TimeHistorySink {
 public:
  virtual ~TimeHistorySink() = default;
  // Called once before any row. `time_channel` describes the time axis (s).
  virtual void begin(const Channel& time_channel, const std::vector<Channel>& channels,
                     const RunMetadata& meta) = 0;
  // One sample: the time and the concatenated channel values (sum of widths).
  virtual void append(double time, std::span<const double> row) = 0;
  // Called once at the end, also after a failure (completed = false).
  virtual void finish(const RunOutcome& outcome) = 0;
};

// Discards every row (when only a run's summary is wanted).
class NullSink final : public TimeHistorySink {
 public:
  void begin(const Channel&, const std::vector<Channel>&, const RunMetadata&) override {}
  void append(double, std::span<const double>) override {}
  void finish(const RunOutcome&) override {}
};

// Keeps every row in memory (tests, small runs).
class MemorySink final : public TimeHistorySink {
 public:
  void begin(const Channel& time_channel, const std::vector<Channel>& channels,
             const RunMetadata& meta) override;
  void append(double time, std::span<const double> row) override;
  void finish(const RunOutcome& outcome) override { outcome_ = outcome; }

  const std::vector<Channel>& channels() const { return channels_; }
  const RunMetadata& metadata() const { return meta_; }
  const RunOutcome& outcome() const { return outcome_; }
  const std::vector<double>& time() const { return time_; }
  std::size_t rows() const { return time_.size(); }
  // Column of a width-1 channel, or component k of a wider one.
  std::vector<double> column(const std::string& name, int component = 0) const;

 private:
  std::vector<Channel> channels_;
  RunMetadata meta_;
  RunOutcome outcome_;
  std::vector<double> time_;
  std::vector<double> data_;  // row-major
  int row_width_ = 0;
};

}  // namespace aerosect
