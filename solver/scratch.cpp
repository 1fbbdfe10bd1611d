#include "solver/scratch.hpp"

#include <algorithm>
#include <utility>

namespace thermorph {
namespace {

struct Spare {
  std::unique_ptr<std::byte[]> block;
  std::size_t bytes = 0;
};

//! This thread's spare (a sweep runs one body per thread: no locking).
Spare& spare() {
  thread_local Spare s;
  return s;
}

}  // namespace

ScratchLease::ScratchLease(std::size_t bytes) {
  Spare& s = spare();
  if (s.block && s.bytes >= bytes) {
    block_ = std::move(s.block);
    bytes_ = s.bytes;
    s.bytes = 0;
    return;
  }
  block_.reset(new std::byte[std::max<std::size_t>(bytes, 1)]);
  bytes_ = bytes;
}

ScratchLease::~ScratchLease() {
  Spare& s = spare();
  if (block_ && (!s.block || s.bytes < bytes_)) {
    s.block = std::move(block_);
    s.bytes = bytes_;
  }
}

void releaseScratch() {
  Spare& s = spare();
  s.block.reset();
  s.bytes = 0;
}

}  // namespace thermorph
