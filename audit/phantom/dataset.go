package phantom

import (
	"fmt"
	"strconv"

	"github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"

	"dwiaudit/audit/synth"
)

// builder collects the elements of one data set and the errors met while
// making them, so that the code that lists a module's attributes reads
// like the module's table.
type builder struct {
	errs []error
}

// item is a data set or one sequence item.
type item struct {
	b     *builder
	elems []*dicom.Element
}

func (b *builder) item() *item { return &item{b: b} }

func (it *item) add(t tag.Tag, v any) {
	e, err := dicom.NewElement(t, v)
	if err != nil {
		it.b.errs = append(it.b.errs, fmt.Errorf("phantom: element %v: %w", t, err))
		return
	}
	it.elems = append(it.elems, e)
}

// str adds a text element (any string VR).
func (it *item) str(t tag.Tag, v ...string) { it.add(t, v) }

// ds adds a Decimal String element (PS3.5 6.2).
func (it *item) ds(t tag.Tag, v ...float64) {
	s := make([]string, len(v))
	for i, f := range v {
		s[i] = synth.FormatDS(f)
	}
	it.add(t, s)
}

// is adds an Integer String element.
func (it *item) is(t tag.Tag, v int) { it.add(t, []string{strconv.Itoa(v)}) }

// num adds a binary integer element (US, UL, SS, SL; AT as group,
// element pairs).
func (it *item) num(t tag.Tag, v ...int) { it.add(t, v) }

// fd adds a binary floating point element (FD, FL).
func (it *item) fd(t tag.Tag, v ...float64) { it.add(t, v) }

// seq adds a sequence of the given items (none: an empty Type 2
// sequence). Each item's elements are put in tag order, as PS3.5 7.5
// wants inside items too.
func (it *item) seq(t tag.Tag, items ...*item) {
	data := make([][]*dicom.Element, len(items))
	for i, x := range items {
		synth.SortElements(x.elems)
		data[i] = x.elems
	}
	it.add(t, data)
}

// code adds a one-item code sequence (PS3.3 8.8 Table 8.8-1a, the basic
// code sequence macro).
func (it *item) code(t tag.Tag, value, scheme, meaning string) {
	c := it.b.item()
	c.str(tag.CodeValue, value)
	c.str(tag.CodingSchemeDesignator, scheme)
	c.str(tag.CodeMeaning, meaning)
	it.seq(t, c)
}

// dataset is the finished data set in tag order, or the first errors.
func (it *item) dataset() (dicom.Dataset, error) {
	if len(it.b.errs) > 0 {
		return dicom.Dataset{}, it.b.errs[0]
	}
	synth.SortElements(it.elems)
	return dicom.Dataset{Elements: it.elems}, nil
}

// privateBlock is the block of element numbers every private block here
// reserves: Private Creator (gggg,0010), elements (gggg,10xx) (PS3.5
// 7.8.1). Real scanners use block 0x10 for these blocks too (common
// practice); a reader must still find it through the creator.
const privateBlock = 0x10

// privateTag is element xx of the block privateBlock in group g:
// (gggg,10xx).
func privateTag(group uint16, xx uint8) tag.Tag {
	return tag.Tag{Group: group, Element: privateBlock<<8 | uint16(xx)}
}

// private adds a private element (PS3.5 7.8) with its VR given: the data
// dictionary does not know private elements, so suyashkumar's writer
// takes the VR from the element (and writes no VR in Implicit VR).
func (it *item) private(t tag.Tag, vr string, v any) {
	val, err := dicom.NewValue(v)
	if err != nil {
		it.b.errs = append(it.b.errs, fmt.Errorf("phantom: private element %v: %w", t, err))
		return
	}
	it.elems = append(it.elems, &dicom.Element{Tag: t, ValueRepresentation: tag.GetVRKind(t, vr), RawValueRepresentation: vr, Value: val})
}

// creator adds the Private Creator Data Element (gggg,0010), LO, that
// reserves block privateBlock of group g for name (PS3.5 7.8.1).
func (it *item) creator(group uint16, name string) {
	it.private(tag.Tag{Group: group, Element: privateBlock}, "LO", []string{name})
}
