#!/usr/bin/env bash
# The SocketCAN end-to-end test. This machine's kernel has no CAN support, so
# the test boots a small VM: Debian's own kernel (its can, can-raw, can-dev
# and vcan modules) under qemu with software emulation, an initramfs holding
# busybox, those modules, termvel and the check program
# (tests/vm/can_check.rs). Inside, vcan0 is created and the check runs
# `termvel live` on it while it sends frames, then reports back on the serial
# console; this script looks for the result line.
#
# Downloads only Debian packages: qemu-system-x86 and busybox-static (apt),
# and the kernel package (apt-get download, cached in target/socketcan-vm).
#
#   TERMVEL_LOAD_SECS   length of the load phase (default 60; 0 skips it)
#   TERMVEL_VM_DIR      work directory (default target/socketcan-vm)
set -euo pipefail
cd "$(dirname "$0")/.."
root=$PWD
work=${TERMVEL_VM_DIR:-$root/target/socketcan-vm}
load_secs=${TERMVEL_LOAD_SECS:-60}
mkdir -p "$work"

sudo=""
[ "$(id -u)" -eq 0 ] || sudo="sudo"

# 1. The emulator and a static busybox.
need=()
command -v qemu-system-x86_64 >/dev/null 2>&1 || need+=(qemu-system-x86)
dpkg -s busybox-static >/dev/null 2>&1 || need+=(busybox-static)
if ((${#need[@]})); then
  echo "socketcan-vm: installing ${need[*]}"
  $sudo apt-get update -qq
  DEBIAN_FRONTEND=noninteractive $sudo apt-get install -y -qq --no-install-recommends "${need[@]}" >/dev/null
fi

# 2. Debian's kernel: the image and the four CAN modules. The package name
#    carries the ABI number, which moves with security updates: resolve it.
pkg=$(apt-cache depends linux-image-amd64 | awk '/Depends: linux-image-[0-9]/ { print $2; exit }')
[ -n "$pkg" ] || { echo "socketcan-vm: cannot resolve the kernel package from linux-image-amd64" >&2; exit 1; }
kdir=$work/$pkg
if [ ! -s "$kdir/vmlinux" ] || [ ! -s "$kdir/vcan.ko" ]; then
  echo "socketcan-vm: fetching $pkg"
  rm -rf "$kdir" && mkdir -p "$kdir/x"
  (cd "$kdir" && { apt-get download -q "$pkg" 2>/dev/null || { $sudo apt-get update -qq && apt-get download -q "$pkg"; }; })
  deb=$(ls "$kdir"/*.deb)
  dpkg-deb --fsys-tarfile "$deb" >"$kdir/fs.tar"
  tar -x -f "$kdir/fs.tar" -C "$kdir/x" --wildcards './boot/vmlinuz-*' '*/kernel/net/can/*' '*/kernel/drivers/net/can/*'
  rm -f "$kdir/fs.tar" "$deb"
  # Boot the uncompressed kernel directly (twice as fast as through the
  # firmware): the xz stream inside the bzImage. Modules may be .ko or .ko.xz.
  python3 - "$kdir" <<'EOF'
import glob, lzma, os, sys
k = sys.argv[1]
z = open(glob.glob(os.path.join(k, "x/boot/vmlinuz-*"))[0], "rb").read()
at = z.find(b"\xfd7zXZ\x00")
if at < 0:
    sys.exit("no xz stream in the kernel image")
d = lzma.LZMADecompressor(format=lzma.FORMAT_XZ)
open(os.path.join(k, "vmlinux"), "wb").write(d.decompress(z[at:]))
for name, rel in [("can", "net/can/can"), ("can-raw", "net/can/can-raw"),
                  ("can-dev", "drivers/net/can/dev/can-dev"), ("vcan", "drivers/net/can/vcan")]:
    found = glob.glob(os.path.join(k, "x/*/modules/*/kernel", rel + ".ko*")) + \
            glob.glob(os.path.join(k, "x/usr/lib/modules/*/kernel", rel + ".ko*"))
    if not found:
        sys.exit(f"module {rel} not in the package")
    data = open(found[0], "rb").read()
    if found[0].endswith(".xz"):
        data = lzma.decompress(data)
    open(os.path.join(k, name + ".ko"), "wb").write(data)
EOF
  rm -rf "$kdir/x"
fi

# 3. termvel and the check program, as built for the host (the VM gets the
#    same C library, copied in).
cargo build --release --bin termvel --example vm-can-check
bins=("$root/target/release/termvel" "$root/target/release/examples/vm-can-check")

# 4. The initramfs.
rootfs=$work/rootfs
rm -rf "$rootfs"
mkdir -p "$rootfs"/{bin,sbin,proc,sys,dev,tmp,mods,usr/bin,usr/sbin}
cp /bin/busybox "$rootfs/bin/busybox"
cp "$kdir"/{can,can-raw,can-dev,vcan}.ko "$rootfs/mods/"
for b in "${bins[@]}"; do
  objcopy --strip-debug "$b" "$rootfs/bin/$(basename "$b")"
  for lib in $(ldd "$b" | awk '/=> \// { print $3 } /^\t\// { print $1 }'); do
    mkdir -p "$rootfs$(dirname "$lib")"
    cp -L "$lib" "$rootfs$lib"
  done
done
cat >"$rootfs/init" <<'EOF'
#!/bin/busybox sh
/bin/busybox --install -s /bin
mount -t proc proc /proc
mount -t sysfs sysfs /sys
mount -t devtmpfs devtmpfs /dev
mount -t tmpfs tmpfs /tmp
mkdir -p /dev/pts && mount -t devpts devpts /dev/pts
for m in can can-raw can-dev vcan; do insmod /mods/$m.ko || echo "TERMVEL-VM-RESULT FAIL (insmod $m)"; done
ip link add dev vcan0 type vcan && ip link set vcan0 mtu 72 && ip link set vcan0 up
echo "vm: kernel $(uname -r), $(nproc) cpu(s), load phase ${TERMVEL_LOAD_SECS}s"
export TERMVEL_LOAD_SECS
timeout 1500 /bin/vm-can-check /bin/termvel 2>&1 || echo "vm: the check program ended with status $?"
echo "vm: done"
poweroff -f
EOF
chmod +x "$rootfs/init"
(cd "$rootfs" && find . | busybox cpio -o -H newc 2>/dev/null | gzip -1 >"$work/initramfs.gz")

# 5. Boot, software emulation only (KVM was seen to fail on these machines).
cpus=$(nproc)
((cpus > 2)) && cpus=2
console=$work/console.log
rm -f "$console"
echo "socketcan-vm: booting ($cpus vCPU, load phase ${load_secs}s)"
start=$(date +%s)
timeout $((load_secs * 4 + 900)) qemu-system-x86_64 -accel tcg,thread=multi -smp "$cpus" -m 1024 \
  -nodefaults -display none -no-reboot -monitor none \
  -serial "file:$console" \
  -kernel "$kdir/vmlinux" -initrd "$work/initramfs.gz" \
  -append "console=ttyS0 quiet panic=-1 TERMVEL_LOAD_SECS=$load_secs" || true
echo "socketcan-vm: the VM ran $(($(date +%s) - start)) s"
grep -E '^(ok  |FAIL|vm: |LOAD-FIGURES|     |TERMVEL-VM-RESULT|[0-9]+ checks failed)' "$console" || true
if grep -q '^TERMVEL-VM-RESULT PASS' "$console" && ! grep -q 'TERMVEL-VM-RESULT FAIL' "$console"; then
  echo "socketcan-vm: PASS"
else
  echo "socketcan-vm: FAIL (console log: $console)" >&2
  tail -n 40 "$console" >&2 || true
  exit 1
fi
