#pragma once
//! The read-only pages of the executable's and the shared libraries' code and constants that a large run's set-up
//! faulted in (the case's parsing, the body's build, the results file's creation) are given back after the set-up:
//! the pages stay in the page cache, and those that the integration uses come back on their first use.

namespace thermorph {

//! Unmaps the resident pages of every loaded object's read-only segments (PT_LOAD without write permission:
//! never written, so a page read again from the file is the same) with madvise(MADV_DONTNEED). Linux only (a no-op
//! elsewhere); errors are ignored (the pages stay). Returns the bytes of the ranges given back (0: none).
unsigned long releaseReadOnlyPages();

}  // namespace thermorph
