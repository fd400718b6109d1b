# mk/install.mk - the shared library, `make install` and `make uninstall`.
#
#   make install [PREFIX=/usr/local] [DESTDIR=stage]   the command, both
#       libraries, the header, millrace.pc, the man page, bash completion
#       and the samples the man page's examples use
#   make uninstall (same PREFIX and DESTDIR)            removes exactly those
#
# The directories can be set one by one too (a Debian package would give
# PREFIX=/usr LIBDIR=/usr/lib/$(DEB_HOST_MULTIARCH)).  Included from the
# Makefile after its settings: it uses B, LIB_SRC, CC, CPPFLAGS, CFLAGS, Q.

PREFIX        ?= /usr/local
BINDIR        ?= $(PREFIX)/bin
LIBDIR        ?= $(PREFIX)/lib
INCLUDEDIR    ?= $(PREFIX)/include
DATADIR       ?= $(PREFIX)/share
MANDIR        ?= $(DATADIR)/man
PKGCONFIGDIR  ?= $(LIBDIR)/pkgconfig
COMPLETIONDIR ?= $(DATADIR)/bash-completion/completions
EXAMPLESDIR   ?= $(DATADIR)/doc/millrace/examples
INSTALL       ?= install
# Run after installing into the live system as root, so that the loader
# finds the new soname at once (`LDCONFIG=:` skips it).
LDCONFIG      ?= ldconfig
refresh_loader = $(if $(DESTDIR),,if [ "$$(id -u)" = 0 ] && command -v $(LDCONFIG) >/dev/null; then $(LDCONFIG); fi)

# The version and soname come from the header, the one place they are kept.
MR_VERSION := $(shell sed -n 's/^\#define MR_VERSION_STRING "\(.*\)"/\1/p' include/millrace.h)
MR_SOVERSION := $(firstword $(subst ., ,$(MR_VERSION)))
SONAME     := libmillrace.so.$(MR_SOVERSION)
SHLIB      := libmillrace.so.$(MR_VERSION)

# The shared library is linked against the default OpenBLAS (the system's
# BLAS alternative), not the command's serial build: a program that runs
# fitters on several threads needs one that allows concurrent calls
# (millrace.h, "Threads").
SHLIB_LIBS := -lcsv $(shell pkg-config --libs $(PKGS) 2>/dev/null) -pthread -lm
PIC_OBJ    := $(LIB_SRC:%.c=$(B)/pic/%.o)

.PHONY: shared install uninstall install-check

all: shared
shared: $(B)/$(SHLIB) $(B)/$(SONAME) $(B)/libmillrace.so

$(B)/pic/%.o: %.c
	@mkdir -p $(dir $@)
	@$(if $(Q),echo "  CC pic  $<")
	$(Q)$(CC) $(CPPFLAGS) $(CFLAGS) -fPIC -c $< -o $@

# -fvisibility=hidden (CFLAGS) leaves only the MR_API calls exported;
# tests/cli/install.sh checks the list against the header.
$(B)/$(SHLIB): $(PIC_OBJ)
	$(Q)$(CC) $(filter-out -MMD -MP,$(CFLAGS)) -shared -Wl,-soname,$(SONAME) -Wl,--no-undefined $(LDFLAGS) \
	  -o $@ $^ $(SHLIB_LIBS)

$(B)/$(SONAME) $(B)/libmillrace.so: $(B)/$(SHLIB)
	$(Q)ln -sf $(SHLIB) $@

# The samples the man page's examples use, with their description.
EXAMPLES := README.md falls.csv.zst falls.model screening.csv.zst screening.model

# Every installed file, as the pairs source:destination; uninstall removes
# the destinations of this same list, and the links and the .pc file
# (below) made beside it.
INSTALL_BIN  := $(B)/millrace:$(BINDIR)/millrace
INSTALL_DATA := $(B)/libmillrace.a:$(LIBDIR)/libmillrace.a \
                $(B)/$(SHLIB):$(LIBDIR)/$(SHLIB) \
                include/millrace.h:$(INCLUDEDIR)/millrace.h \
                doc/millrace.1:$(MANDIR)/man1/millrace.1 \
                doc/millrace.bash-completion:$(COMPLETIONDIR)/millrace \
                $(foreach f,$(EXAMPLES),samples/$(f):$(EXAMPLESDIR)/$(f))
INSTALL_LINKS := $(LIBDIR)/$(SONAME) $(LIBDIR)/libmillrace.so
PC_FILE := $(PKGCONFIGDIR)/millrace.pc

# The .pc file says where the files went, so it is written straight into
# place (nothing in the build tree, which `sudo make install` would leave
# owned by root).  libdir and includedir are given relative to ${prefix}
# when they lie under it.
write_pc = sed -e 's|@PREFIX@|$(PREFIX)|' -e 's|@VERSION@|$(MR_VERSION)|' \
  -e 's|@LIBDIR@|$(patsubst $(PREFIX)/%,$${prefix}/%,$(LIBDIR))|' \
  -e 's|@INCLUDEDIR@|$(patsubst $(PREFIX)/%,$${prefix}/%,$(INCLUDEDIR))|' mk/millrace.pc.in

src_of = $(word 1,$(subst :, ,$(1)))
dest_of = $(DESTDIR)$(word 2,$(subst :, ,$(1)))

install: $(foreach f,$(INSTALL_BIN) $(INSTALL_DATA),$(call src_of,$(f)))
	$(Q)$(foreach f,$(INSTALL_BIN),$(INSTALL) -D -m 755 $(call src_of,$(f)) $(call dest_of,$(f)) &&) \
	  $(foreach f,$(INSTALL_DATA),$(INSTALL) -D -m 644 $(call src_of,$(f)) $(call dest_of,$(f)) &&) \
	  $(foreach l,$(INSTALL_LINKS),ln -sf $(SHLIB) $(DESTDIR)$(l) &&) true
	$(Q)$(INSTALL) -d $(DESTDIR)$(PKGCONFIGDIR) && $(write_pc) >$(DESTDIR)$(PC_FILE) && chmod 644 $(DESTDIR)$(PC_FILE)
	$(Q)$(refresh_loader)
	@echo "installed millrace $(MR_VERSION) under $(DESTDIR)$(PREFIX)"

# Of the folders, only the examples' and share/doc/millrace are ours alone
# (rmdir leaves them if something else was put there).
uninstall:
	$(Q)rm -f $(foreach f,$(INSTALL_BIN) $(INSTALL_DATA),$(call dest_of,$(f))) $(addprefix $(DESTDIR),$(INSTALL_LINKS) $(PC_FILE))
	$(Q)rmdir $(DESTDIR)$(EXAMPLESDIR) $(DESTDIR)$(patsubst %/,%,$(dir $(EXAMPLESDIR))) 2>/dev/null || true
	$(Q)$(refresh_loader)
	@echo "removed millrace from $(DESTDIR)$(PREFIX)"

# Also part of `make cli-check`; this runs it alone.
install-check: all
	bash tests/cli/install.sh

-include $(PIC_OBJ:.o=.d)
