#pragma once
// Internal: the HDF5 details shared by Hdf5TimeHistoryWriter
// (hdf5_writer.cpp) and Hdf5Document (hdf5_document.cpp), written once.
// Not installed, not part of the public interface; only the two io sources
// include it.
//
//  - Error reporting: HDF5's automatic error printing is replaced by a
//    handler that records the innermost message (quiet_hdf5); describe()
//    turns an H5::Exception and that message into text for an OutputError.
//    C API failures (negative returns) become H5::Exception through check().
//  - Files and groups are created with link and attribute creation order
//    tracked and indexed, as netCDF-4 itself does, so ncdump and xarray list
//    variables and attributes in the order they were written.
//  - Text attributes have the form netCDF-4 gives NC_STRING attributes:
//    scalar, variable-length, UTF-8 (h5py reads them as str).
//  - RunMetadata: root attributes (Conventions, title, aerosect_file_kind,
//    the text attributes) and /parameters/<group>/<name> scalar datasets.
//  - The temporary file: a plain probe that explains why a file cannot be
//    created, a free-space check, and the rename into place.

#include <H5Cpp.h>

#include <cstdint>
#include <memory>
#include <set>
#include <string>
#include <vector>

#include "aerosect/integrate/sink.hpp"

namespace aerosect::hdf5_detail {

inline constexpr unsigned kCreationOrder = H5P_CRT_ORDER_TRACKED | H5P_CRT_ORDER_INDEXED;
inline constexpr const char* kParametersGroup = "parameters";

// --- Errors -----------------------------------------------------------------

// Turns off HDF5's printing of error stacks (C and C++ API) for this thread
// and starts recording the innermost message instead. Call before each
// series of HDF5 calls.
void quiet_hdf5();

// "HDF5 FUNCTION: DETAIL (INNERMOST REASON)"; clears the recorded message.
std::string describe(const H5::Exception& e);

// C API results: a negative value throws H5::Exception(function, "failed").
void check(herr_t status, const char* function);
hid_t check_id(hid_t id, const char* function);

// --- Attributes ---------------------------------------------------------------

// Scalar attributes. Text: variable-length UTF-8 (netCDF-4 NC_STRING).
void write_text(const H5::H5Object& object, const std::string& name, const std::string& value);
void write_double(const H5::H5Object& object, const std::string& name, double value);  // F64LE
void write_int32(const H5::H5Object& object, const std::string& name, std::int32_t value);
void write_int64(const H5::H5Object& object, const std::string& name, std::int64_t value);
// 1-D integer attributes (CF flag_values of an int32 or int64 variable).
void write_int32_array(const H5::H5Object& object, const std::string& name,
                       const std::vector<std::int32_t>& values);
void write_int64_array(const H5::H5Object& object, const std::string& name,
                       const std::vector<std::int64_t>& values);
// The attribute that holds the units of numeric attribute `name`: an
// attribute has no attributes of its own, so NAME's units are the text
// attribute NAME_units beside it (UDUNITS, "1" for counts and flags).
inline std::string units_name(const std::string& name) { return name + "_units"; }

// --- Creation -------------------------------------------------------------------

// Dataset creation properties: attribute creation order only (contiguous).
H5::DSetCreatPropList plain_properties();
// Chunked with the given chunk dimensions; shuffle + deflate when
// deflate_level > 0; attribute creation order.
H5::DSetCreatPropList chunked_properties(const std::vector<hsize_t>& chunk, int deflate_level);

// A new file (truncating) with link and attribute creation order tracked.
std::unique_ptr<H5::H5File> create_file(const std::string& path);

// A new group with link and attribute creation order tracked (the C++ API
// cannot pass a group creation property list, so the C API makes it).
H5::Group create_group(const H5::Group& parent, const std::string& name);

// H5DSset_scale / H5DSattach_scale.
void set_scale(const H5::DataSet& dataset, const std::string& name);
void attach_scale(const H5::DataSet& dataset, const H5::DataSet& scale, unsigned dimension);

// --- Metadata -------------------------------------------------------------------

// A single link name: not empty, not ".", no '/'.
bool valid_link_name(const std::string& name);

// Empty when `meta` can be written, else what is wrong: a text attribute
// that is empty, in `reserved` or given twice; a parameter group or name
// that is not a link name, or a parameter given twice.
std::string metadata_problem(const RunMetadata& meta, std::set<std::string> reserved);

// The root attributes of `meta`: Conventions = "CF-1.8", title,
// aerosect_file_kind, then each text attribute in order.
void write_root_attributes(const H5::Group& root, const RunMetadata& meta);
// /parameters/<group>/<name>: scalar F64LE datasets with units and
// long_name, groups in order of first appearance. Nothing when there are
// no parameters.
void write_parameters(const H5::Group& root, const RunMetadata& meta);

// --- The file on disk ---------------------------------------------------------

// Claims `target` for this run (claim_output, output_claim.hpp): throws
// OutputError(target, "a directory of that name exists") when `target` is a
// directory, and refuses a device, a FIFO, an input of this run and an
// output another run holds.
void require_not_directory(const std::string& target);

// Empty when `temporary_path` can be created (it is, empty), else the
// reason from a plain fopen ("No such file or directory", "Not a
// directory", "Permission denied").
std::string cannot_create(const std::string& temporary_path);

// Empty when there is room for `bytes` plus the metadata close() flushes in
// the directory of `file` (or nothing is known), else the reason, naming
// `what` ("the next block") as what needs the room. HDF5 1.10
// cannot always close a file after a write failed for lack of space, so a
// full disk is detected before writing, while the file can still be closed.
std::string lack_of_space(const std::string& file, std::uintmax_t bytes, const std::string& what);

// Renames `from` onto `to`; empty on success, else the whole message
// ("cannot rename 'A' to 'B': REASON; the data is kept in 'A'").
std::string rename_into_place(const std::string& from, const std::string& to);

// Closing after a failure: ignore errors, close each object once. A file
// whose close failed is let go without its destructor (a second H5Fclose
// of the same id crashes HDF5 1.10).
void close_quietly(H5::DataSet& dataset) noexcept;
void close_quietly(std::unique_ptr<H5::H5File>& file) noexcept;
// Closes a dataset just written, so that a failed write-back of its data
// (HDF5 flushes a dataset's buffer when it closes) is thrown here, not
// printed by the destructor; the wrapper is left empty either way.
void close_now(H5::DataSet& dataset);

// True once an HDF5 call on a file failed (see aerosect::hdf5_shutdown_unsafe).
bool shutdown_unsafe() noexcept;

}  // namespace aerosect::hdf5_detail
