#include "drivers/resident_code.hpp"

#if defined(__linux__)
#include <link.h>
#include <sys/mman.h>
#include <unistd.h>

#include <cstdint>
#include <cstring>
#endif

namespace thermorph {

unsigned long releaseReadOnlyPages() {
#if defined(__linux__)
  struct Context {
    std::uintptr_t page;
    unsigned long released;
  } context{static_cast<std::uintptr_t>(sysconf(_SC_PAGESIZE)), 0};
  dl_iterate_phdr(
      [](dl_phdr_info* info, std::size_t, void* data) {
        auto& ctx = *static_cast<Context*>(data);
        if (info->dlpi_name && std::strstr(info->dlpi_name, "linux-vdso")) return 0;
        for (int i = 0; i < info->dlpi_phnum; ++i) {
          const ElfW(Phdr)& p = info->dlpi_phdr[i];
          // Writable segments (data, and the relocated pointers that RELRO makes read-only afterwards) are left
          // alone: their pages differ from the file's.
          if (p.p_type != PT_LOAD || (p.p_flags & PF_W)) continue;
          // Whole pages inside the segment only (a page shared with a writable segment stays).
          const std::uintptr_t begin = (info->dlpi_addr + p.p_vaddr + ctx.page - 1) & ~(ctx.page - 1);
          const std::uintptr_t end = (info->dlpi_addr + p.p_vaddr + p.p_memsz) & ~(ctx.page - 1);
          if (end > begin && madvise(reinterpret_cast<void*>(begin), end - begin, MADV_DONTNEED) == 0)
            ctx.released += end - begin;
        }
        return 0;
      },
      &context);
  return context.released;
#else
  return 0;
#endif
}

}  // namespace thermorph
