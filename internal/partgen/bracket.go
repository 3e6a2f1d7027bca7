package partgen

// BracketProfile is the ribbed bracket's cross-section in millimetres,
// counter-clockwise: an angle with legs 80 and 60 long and 6 thick, and
// two ribs 4 wide standing 14 above the long leg. Its area is
// 80·6 + 6·54 + 2·4·14 = 916 mm².
func BracketProfile() []point2 {
	return []point2{
		{0, 0}, {80, 0}, {80, 6}, {59, 6}, {59, 20}, {55, 20}, {55, 6},
		{34, 6}, {34, 20}, {30, 20}, {30, 6}, {6, 6}, {6, 60}, {0, 60},
	}
}

// BracketDepth is the bracket's extrusion length along z, mm.
const BracketDepth = 40.0

// Bracket is the profile extruded from z = 0 to BracketDepth, as two
// solid blocks: "mounting_face", the flat side on y = 0, and "bracket",
// all the rest.
func Bracket() []Block {
	profile := BracketProfile()
	body := Block{Name: "bracket"}
	mount := Block{Name: "mounting_face"}
	for i, p := range profile {
		q := profile[(i+1)%len(profile)]
		w := wall(p, q, 0, BracketDepth)
		if p[1] == 0 && q[1] == 0 {
			mount.Triangles = append(mount.Triangles, w...)
		} else {
			body.Triangles = append(body.Triangles, w...)
		}
	}
	caps := earClip(profile)
	body.Triangles = append(body.Triangles, face(caps, BracketDepth, true)...)
	body.Triangles = append(body.Triangles, face(caps, 0, false)...)
	return []Block{body, mount}
}

// earClip triangulates a simple counter-clockwise polygon by cutting off
// convex corners whose triangle holds no other corner.
func earClip(poly []point2) [][3]point2 {
	idx := make([]int, len(poly))
	for i := range idx {
		idx[i] = i
	}
	var out [][3]point2
	for len(idx) > 3 {
		cut := false
		for k := range idx {
			a, b, c := poly[idx[(k+len(idx)-1)%len(idx)]], poly[idx[k]], poly[idx[(k+1)%len(idx)]]
			if orient(a, b, c) <= 0 {
				continue
			}
			ear := true
			for _, o := range idx {
				p := poly[o]
				if p != a && p != b && p != c && orient(a, b, p) >= 0 && orient(b, c, p) >= 0 && orient(c, a, p) >= 0 {
					ear = false
					break
				}
			}
			if ear {
				out = append(out, [3]point2{a, b, c})
				idx = append(idx[:k], idx[k+1:]...)
				cut = true
				break
			}
		}
		if !cut {
			panic("partgen: profile is not a simple counter-clockwise polygon")
		}
	}
	return append(out, [3]point2{poly[idx[0]], poly[idx[1]], poly[idx[2]]})
}

func orient(a, b, c point2) float64 {
	return (b[0]-a[0])*(c[1]-a[1]) - (b[1]-a[1])*(c[0]-a[0])
}
