package site

import (
	"cmp"
	"fmt"
	"net/http"
	"slices"
)

// Ownership in cluster mode (issue 15, "Queries and pages"): each
// instance's pages and /api/series show the series it owns, and say which
// instance owns the other partitions, as the lease bucket shows them.

// Owners is implemented by a Source whose instance shares the series with
// other instances (cluster.partitions > 0).
type Owners interface {
	// Ownership returns this instance's name and the instance holding
	// each partition's lease ("" for a free one); ok is false when this
	// instance owns every series (single-instance mode).
	Ownership() (instance string, owners []string, ok bool)
	// PartitionOf returns the partition of a topic's series.
	PartitionOf(topic string) (int, bool)
}

// Cluster is the ownership shown on the index page and in /api/partitions.
type Cluster struct {
	Instance   string       `json:"instance"`
	Partitions int          `json:"partitions"`
	Owners     []PartOwner  `json:"owners"` // per partition, in order
	Groups     []OwnerGroup `json:"-"`      // per instance, this one first
}

// PartOwner is one partition and the instance holding its lease ("" for
// none).
type PartOwner struct {
	Partition int    `json:"partition"`
	Instance  string `json:"instance"`
}

// OwnerGroup is the partitions one instance holds ("" for the free ones).
type OwnerGroup struct {
	Instance   string
	Self       bool
	Partitions []int
}

// cluster returns the ownership, or nil in single-instance mode.
func (s *server) cluster() *Cluster {
	o, ok := s.src.(Owners)
	if !ok {
		return nil
	}
	self, owners, ok := o.Ownership()
	if !ok {
		return nil
	}
	c := &Cluster{Instance: self, Partitions: len(owners), Owners: make([]PartOwner, len(owners))}
	by := map[string]*OwnerGroup{}
	for p, inst := range owners {
		c.Owners[p] = PartOwner{Partition: p, Instance: inst}
		g := by[inst]
		if g == nil {
			g = &OwnerGroup{Instance: inst, Self: inst == self}
			by[inst] = g
		}
		g.Partitions = append(g.Partitions, p)
	}
	if by[self] == nil {
		by[self] = &OwnerGroup{Instance: self, Self: true}
	}
	for _, g := range by {
		c.Groups = append(c.Groups, *g)
	}
	slices.SortFunc(c.Groups, func(a, b OwnerGroup) int {
		switch {
		case a.Self != b.Self:
			if a.Self {
				return -1
			}
			return 1
		case (a.Instance == "") != (b.Instance == ""): // free partitions last
			if a.Instance == "" {
				return 1
			}
			return -1
		}
		return cmp.Compare(a.Instance, b.Instance)
	})
	return c
}

// ownerOf returns the partition of topic and the instance holding it, ok
// false in single-instance mode.
func (s *server) ownerOf(c *Cluster, topic string) (p int, owner string, ok bool) {
	if c == nil {
		return 0, "", false
	}
	p, ok = s.src.(Owners).PartitionOf(topic)
	if !ok || p >= len(c.Owners) {
		return 0, "", false
	}
	return p, c.Owners[p].Instance, true
}

// owned keeps, in cluster mode, the views of the series this instance
// owns now: a series of a partition that moved to another instance stays
// in memory here, but is no longer this instance's to show.
func (s *server) owned(vs []View) []View {
	c := s.cluster()
	if c == nil {
		return vs
	}
	return slices.DeleteFunc(vs, func(v View) bool {
		_, owner, ok := s.ownerOf(c, v.Topic)
		return ok && owner != c.Instance
	})
}

// elsewhere answers a request for a topic that another instance owns (or
// no instance, for a free partition) with a 404 that names the partition
// and its owner, and reports whether it did.
func (s *server) elsewhere(w http.ResponseWriter, topic string, asJSON bool) bool {
	c := s.cluster()
	p, owner, ok := s.ownerOf(c, topic)
	if !ok || owner == c.Instance {
		return false
	}
	msg := fmt.Sprintf("series %q is in partition %d, which instance %q owns; this is instance %q", topic, p, owner, c.Instance)
	if owner == "" {
		msg = fmt.Sprintf("series %q is in partition %d, which no instance owns at the moment; this is instance %q", topic, p, c.Instance)
	}
	if asJSON {
		writeJSON(w, http.StatusNotFound, map[string]any{"error": msg, "partition": p, "owner": owner})
	} else {
		http.Error(w, msg, http.StatusNotFound)
	}
	return true
}

// annotate adds the partition and owner to a summary (cluster mode).
func (s *server) annotate(c *Cluster, sm *Summary) {
	if p, owner, ok := s.ownerOf(c, sm.Topic); ok {
		sm.Partition, sm.Owner = &p, owner
	}
}

// partitions serves /api/partitions: the instance holding each
// partition, and this instance's name ({"instance": "", "partitions": 0,
// "owners": []} in single-instance mode).
func (s *server) partitions(w http.ResponseWriter, r *http.Request) {
	c := s.cluster()
	if c == nil {
		c = &Cluster{Owners: []PartOwner{}}
	}
	writeJSON(w, http.StatusOK, c)
}
