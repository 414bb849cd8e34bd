package prep

import "syscall"

// readRaw is read for a path of the operating system, through the system
// calls themselves: open(2), fstat(2), pread(2), close(2). os.Open costs
// twice as much for a small file (measured on 64×64 PNG probes: 17 µs a
// file through os.Open, Stat and ReadAt, 8 µs here), as it registers the
// descriptor with Go's network poller and sets up a cleanup; a folder scan
// opens thousands of small files, so the difference is a tenth of a probe
// image's whole decoding. tried is false when the call was interrupted
// (EINTR): read then takes the portable way. Otherwise ok has read's
// meaning; the file is opened without blocking, so that a FIFO does not
// hang here (it is refused as not a regular file, and Load says why).
func (d *Decoder) readRaw(name string) (data []byte, ok, tried bool) {
	fd, err := syscall.Open(name, syscall.O_RDONLY|syscall.O_CLOEXEC|syscall.O_NONBLOCK, 0)
	if err == syscall.EINTR {
		return nil, false, false
	}
	if err != nil {
		return nil, false, true
	}
	defer syscall.Close(fd)
	var st syscall.Stat_t
	if err := syscall.Fstat(fd, &st); err != nil {
		return nil, false, err != syscall.EINTR
	}
	if st.Mode&syscall.S_IFMT != syscall.S_IFREG || st.Size <= 0 || st.Size > decoderMaxFile {
		return nil, false, true
	}
	buf := d.fileBuf(int(st.Size))
	for n := 0; n < len(buf); {
		k, err := syscall.Pread(fd, buf[n:], int64(n))
		switch {
		case err == syscall.EINTR:
			continue
		case err != nil || k <= 0: // an error, or the file shrank
			return nil, false, true
		}
		n += k
	}
	return buf, true, true
}
