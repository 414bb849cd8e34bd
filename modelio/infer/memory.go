package infer

import (
	"bufio"
	"bytes"
	"os"
	"strconv"
	"strings"
	"sync"
	"time"
)

var memCache struct {
	sync.Mutex
	at    time.Time
	bytes int64
}

// availableMemory is memAvailable, read at most once a second: runs of a
// few images each come in hundreds during an occlusion scan.
func availableMemory() int64 {
	memCache.Lock()
	defer memCache.Unlock()
	if now := time.Now(); now.Sub(memCache.at) > time.Second {
		memCache.bytes, memCache.at = memAvailable(), now
	}
	return memCache.bytes
}

// memAvailable returns the bytes a new allocation can use without
// swapping: MemAvailable from /proc/meminfo, lowered to the room left under
// the cgroup's memory.max when the process runs in a limited container. It
// returns -1 when neither can be read (the check is then skipped).
func memAvailable() int64 {
	avail := int64(-1)
	if f, err := os.Open("/proc/meminfo"); err == nil {
		sc := bufio.NewScanner(f)
		for sc.Scan() {
			line := sc.Text()
			if rest, ok := strings.CutPrefix(line, "MemAvailable:"); ok {
				fields := strings.Fields(rest)
				if len(fields) >= 1 {
					if kb, err := strconv.ParseInt(fields[0], 10, 64); err == nil {
						avail = kb << 10
					}
				}
				break
			}
		}
		f.Close()
	}
	if lim, ok := readInt("/sys/fs/cgroup/memory.max"); ok {
		if cur, ok := readInt("/sys/fs/cgroup/memory.current"); ok {
			room := max(lim-cur, 0)
			if avail < 0 || room < avail {
				avail = room
			}
		}
	}
	return avail
}

// readInt reads a file holding one integer ("max" and errors give false).
func readInt(p string) (int64, bool) {
	b, err := os.ReadFile(p)
	if err != nil {
		return 0, false
	}
	v, err := strconv.ParseInt(string(bytes.TrimSpace(b)), 10, 64)
	return v, err == nil
}
