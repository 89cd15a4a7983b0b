#pragma once
// One output has one owner, and a run never writes over its own input.
//
// Every writer (HDF5 files, JSON and HTML text files) claims its target path
// before it creates anything. A claim:
//  - refuses a target that exists and is not a regular file (a directory, a
//    device node such as /dev/sda, a FIFO, a socket): writing would replace
//    the node with a regular file;
//  - refuses a target that is one of this process's inputs (the same device
//    and inode as a file registered with register_input: the case file, a
//    recorded gust, a shard being merged, the study folder's case.toml);
//  - takes an exclusive lock on `TARGET.lock`, a file beside the target (an
//    open-file-description lock, fcntl F_OFD_SETLK, which also works where
//    HDF5's own file locking is off, as on many cluster file systems). A
//    second run that wants the same output is refused at once, and never
//    touches the owner's temporary `.part` file.
// Claims last until the process ends (the lock file is then removed; after a
// kill -9 it stays behind, holding no lock, and the next run takes it over).
// Claiming the same target twice in one process is allowed. Failures are
// OutputErrors naming the target.

#include <string>

namespace aerosect {

// "a directory", "a FIFO (named pipe)", "a character device", ... for a
// stat() st_mode that is not a regular file (shared by the input checks).
const char* file_type_name(unsigned mode);

// Records `path` (if it exists) as an input of this process.
void register_input(const std::string& path);

// Claims `target` for this process as described above; throws OutputError.
void claim_output(const std::string& target);

// Releases every claim now (lock files removed), for a process that ends
// without running static destructors (std::_Exit after an HDF5 failure).
void release_output_claims();

// Releases this process's claim on `target` (its lock file removed; nothing
// when it holds none), for a long-lived process that is done with that
// output: the Python module, whose runs write many files in one process,
// would otherwise hold a descriptor per file until it ends.
void release_output_claim(const std::string& target);

}  // namespace aerosect
