# Copies every DICOM file below a folder (argv 1) into one flat folder
# (argv 2) with pydicom's own writer, file names argv 3 + a five-digit
# count + ".dcm", in the order of a sorted walk. With argv 4 "same" the
# files are written unchanged (still by pydicom). Otherwise they become a
# study of another patient: PatientID argv 4, PatientName argv 5,
# StudyDate argv 6, and every UID remapped (study, series, instance, frame
# of reference; the same mapping in every file, so UIDs a structure set
# references follow), except SOP Class UIDs (0008,0016) and (0008,1150),
# the transfer syntax (0002,0010) and the meta header's class (0002,0002).
# Prints the number of files written.
import os, sys
import pydicom
from pydicom.uid import generate_uid
src, dst, prefix, pid, pname, date = sys.argv[1:7]
os.makedirs(dst, exist_ok=True)
uids = {}
def remap(v):
    if v not in uids:
        uids[v] = generate_uid(prefix="2.25.", entropy_srcs=[v, pid])
    return uids[v]
def walk(ds):
    for el in ds:
        if el.VR == "SQ":
            for item in el.value:
                walk(item)
        elif el.VR == "UI" and el.tag not in (0x00080016, 0x00020002, 0x00020010, 0x00081150) and el.value:
            el.value = remap(str(el.value))
n = 0
for root, _, files in sorted(os.walk(src)):
    for f in sorted(files):
        try:
            ds = pydicom.dcmread(os.path.join(root, f))
        except Exception:
            continue
        if pid != "same":
            walk(ds)
            ds.file_meta.MediaStorageSOPInstanceUID = ds.SOPInstanceUID
            ds.PatientID, ds.PatientName, ds.StudyDate = pid, pname, date
        n += 1
        ds.save_as(os.path.join(dst, "%s%05d.dcm" % (prefix, n)), write_like_original=True)
print(n)
