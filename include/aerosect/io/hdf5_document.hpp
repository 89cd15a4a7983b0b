#pragma once
// A whole-array HDF5 file laid out as netCDF-4 with CF-1.8 metadata, for
// results that are not streamed (flutter sweeps, LCO maps, gust summaries).
//
//   Hdf5Document doc("flutter.h5");
//   doc.metadata(meta);                       // root attributes + /parameters
//   doc.axis("speed", speeds, "m s-1", "true airspeed");   // dimension scale
//   doc.integer_axis("mode", {1, 2, 3}, "mode number");
//   doc.dataset("nominal/state_space/damping_ratio", {"speed", "mode"}, data,
//               "1", "damping ratio");        // groups created as needed
//   doc.number_attribute("nominal/state_space", "flutter_speed", 71.2, "m s-1");
//   doc.commit();                             // written: rename into place
//
// Conventions shared with Hdf5TimeHistoryWriter (one implementation of the
// HDF5 details): variable-length UTF-8 text attributes (netCDF NC_STRING,
// str in h5py), creation order tracked, every dataset with `units` and
// `long_name`, axes as HDF5 dimension scales attached to every dimension of
// every dataset that names them. Data are row-major (the last dimension
// varies fastest); datasets larger than 64 KiB are chunked and compressed.
// The file is written to `path + ".part"` and renamed onto `path` by
// commit(); destroying an uncommitted document removes the temporary file.
// Every failure is an OutputError naming the path and the reason.

#include <cstdint>
#include <memory>
#include <span>
#include <string>
#include <vector>

#include "aerosect/integrate/sink.hpp"
#include "aerosect/io/table_layout.hpp"

namespace aerosect {

class Hdf5Document : public TableSink {
 public:
  explicit Hdf5Document(std::string path);
  ~Hdf5Document() override;
  Hdf5Document(const Hdf5Document&) = delete;
  Hdf5Document& operator=(const Hdf5Document&) = delete;

  // Root attributes (Conventions, title, aerosect_file_kind and the text
  // attributes) and the /parameters/<group>/<name> scalars.
  void metadata(const RunMetadata& meta) override;

  // A 1-D coordinate variable that is a dimension scale: at the root, or
  // in a group ("history/time": the group's own dimension `time`, named by
  // its full path in the dims of the datasets that use it).
  void axis(const std::string& name, std::span<const double> values, const std::string& units,
            const std::string& long_name) override;
  void integer_axis(const std::string& name, std::span<const std::int32_t> values,
                    const std::string& long_name) override;

  // A double dataset at `path` ("group/sub/name"; groups created as needed)
  // over the named axes; data.size() must equal the product of their lengths.
  // In a group, an axis defined elsewhere is replaced by the group's own
  // copy of it ("group/sub/speed": values, units, long_name and a comment),
  // made on first use, so that a netCDF-4 reader opening the group alone
  // (xarray's open_dataset(path, group=...)) finds its coordinates; a name
  // that copy needs being taken by another object is refused.
  void dataset(const std::string& path, const std::vector<std::string>& dims,
               std::span<const double> data, const std::string& units,
               const std::string& long_name) override;

  // The same with the values asked for one chunk at a time (TableSink::Blocks).
  void dataset_blocks(const std::string& path, const std::vector<std::string>& dims, std::size_t count,
                      const Blocks& values, const std::string& units, const std::string& long_name) override;
  void integer_dataset_blocks(const std::string& path, const std::vector<std::string>& dims, std::size_t count,
                              const Blocks& values, const std::string& units, const std::string& long_name,
                              const Flags& flags) override;

  // An int64 dataset whose fill value kIntegerFill is declared (_FillValue);
  // a class (flags given) has flag_values and flag_meanings and no units.
  void integer_dataset(const std::string& path, const std::vector<std::string>& dims,
                       std::span<const std::int64_t> data, const std::string& units,
                       const std::string& long_name, const Flags& flags) override;
  // _FillValue = NaN on the double dataset at `path`.
  void nan_fill(const std::string& path) override;
  // flag_values (int32, the axis's type) and flag_meanings on an integer
  // axis, whose units are removed.
  void axis_flags(const std::string& name, const Flags& flags) override;

  // Attributes on the root ("" or "/"), a group or a dataset (created as a
  // group when nothing is at that path yet). A number's units go into the
  // text attribute NAME_units beside it ("1" for an integer: counts, flags
  // and indices are dimensionless).
  void text_attribute(const std::string& object, const std::string& name,
                      const std::string& value) override;
  void number_attribute(const std::string& object, const std::string& name, double value,
                        const std::string& units) override;
  void integer_attribute(const std::string& object, const std::string& name, std::int64_t value) override;

  // Close and rename onto the target path. Throws OutputError.
  void commit();

  const std::string& path() const { return path_; }

 private:
  struct File;
  std::string path_, temporary_path_;
  std::unique_ptr<File> file_;
  bool committed_ = false;
};

// A text attribute of a file's root group (for reading back aerosect's own
// files). Throws InputError naming the file when it or the attribute is
// missing.
std::string read_text_attribute(const std::string& path, const std::string& name);
// Copies the aerosect file `source` to `target` (under target.part, renamed
// when complete, as a document is written) with its root text attribute
// `name` set to `value` (a variable-length UTF-8 string, as text_attribute
// writes it); every other object and attribute is copied as stored. Throws
// InputError for an unreadable source or one without that attribute,
// OutputError when the target cannot be written.
void copy_with_text_attribute(const std::string& source, const std::string& target, const std::string& name,
                              const std::string& value);
// A double dataset, flattened row-major; InputError when missing, or when it
// holds other than `expected` values (checked before anything is read: a
// file never decides how much is allocated). An integer dataset reads as
// doubles, its declared _FillValue as NaN.
std::vector<double> read_double_dataset(const std::string& path, const std::string& name,
                                        std::size_t expected);

}  // namespace aerosect
